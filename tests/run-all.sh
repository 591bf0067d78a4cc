#!/usr/bin/env bash
# The whole test suite on a fresh Debian machine. Installs what the tests start for real
# (Debian's mosquitto broker, PostgreSQL server binaries, Chromium), builds a virtual
# environment with the project, then runs lint, type checks and pytest.
#
# The tests start their own broker and their own PostgreSQL cluster (as the postgres user, on
# loopback, on free ports) so they can stop, kill and restart them; nothing is shared with a
# system service. TECFLEET_REQUIRE_SERVICES=1 turns "service not available" skips into failures.
set -euo pipefail
cd "$(dirname "$0")/.."

need=()
# A bare Debian may lack Python itself or its venv module (ensurepip).
command -v python3 >/dev/null 2>&1 || need+=(python3)
python3 -c 'import ensurepip' >/dev/null 2>&1 || need+=(python3-venv)
command -v mosquitto >/dev/null 2>&1 || [ -x /usr/sbin/mosquitto ] || need+=(mosquitto)
compgen -G "/usr/lib/postgresql/*/bin/initdb" >/dev/null || need+=(postgresql)
command -v chromium >/dev/null 2>&1 || need+=(chromium)
if [ ${#need[@]} -gt 0 ]; then
    sudo=""
    [ "$(id -u)" -ne 0 ] && sudo=sudo
    $sudo apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends "${need[@]}" >/dev/null
fi

python3 -m venv .venv
.venv/bin/python -m pip install -q --upgrade pip
.venv/bin/python -m pip install -q -e '.[test]'

.venv/bin/ruff check ingest analytics api tests
.venv/bin/ruff format --check ingest analytics api tests
# mypy checks the installed names (tecfleet.*): a tree of links maps them onto the folders.
mkdir -p .mypy-src/tecfleet
for stage in ingest analytics api; do ln -sfn "$PWD/$stage" ".mypy-src/tecfleet/$stage"; done
(cd .mypy-src && ../.venv/bin/mypy --config-file ../pyproject.toml -p tecfleet)
TECFLEET_REQUIRE_SERVICES="${TECFLEET_REQUIRE_SERVICES:-1}" .venv/bin/python -m pytest "$@"
