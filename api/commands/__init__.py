"""Subcommands of ``tecfleet`` that live in modules of their own: each has ``add_parser(sub)``."""
