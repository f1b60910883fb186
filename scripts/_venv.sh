# Shared by scripts/demo and scripts/test: create .venv and install the project into it.
# Usage: . scripts/_venv.sh EXTRAS   (EXTRAS: "" or "test")
set -euo pipefail
ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
PY="${PYTHON:-python3}"
if [ ! -x "$ROOT/.venv/bin/python" ]; then
    "$PY" -m venv "$ROOT/.venv"
fi
VENV_PY="$ROOT/.venv/bin/python"
STAMP="$ROOT/.venv/.installed-${1:-base}"
# Reinstall only when pyproject.toml changed since the last install.
if [ ! -f "$STAMP" ] || [ "$ROOT/pyproject.toml" -nt "$STAMP" ]; then
    "$VENV_PY" -m pip install --quiet --disable-pip-version-check --upgrade pip
    if [ -n "${1:-}" ]; then
        "$VENV_PY" -m pip install --quiet --disable-pip-version-check -e "$ROOT[$1]"
    else
        "$VENV_PY" -m pip install --quiet --disable-pip-version-check -e "$ROOT"
    fi
    touch "$STAMP"
fi
