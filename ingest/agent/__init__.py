"""The device agent: runs on a cooler's controller and gets every reading to the broker.

``sources`` (followed CSV and JSON-lines files, commands) and ``sysfs`` (hwmon, IIO, 1-Wire)
read; ``buffer`` keeps every reading on disk (stdlib sqlite3) until the broker acknowledged it;
``link`` is the MQTT connection (QoS 1, TLS, credentials, status and last will); ``runner`` is
the loop; ``config`` reads the TOML file; ``options`` holds the tunables; ``command`` the
command line. Only the standard library and paho are used: the agent never loads the service's
database or web libraries.
"""
