# Sourced by .ci/demo, .ci/test and bench/run: find Python >= 3.12, make var/venv,
# install the locked dependencies (only when .ci/requirements.lock changed).
set -euo pipefail
ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$ROOT"
mkdir -p var

find_python() {
  local c
  for c in python3.13 python3.12 python3; do
    if command -v "$c" >/dev/null 2>&1 && "$c" -c 'import sys; sys.exit(0 if sys.version_info >= (3, 12) else 1)' 2>/dev/null; then
      command -v "$c"; return 0
    fi
  done
  for c in "${PYENV_ROOT:-$HOME/.pyenv}"/versions/3.1[2-9]*/bin/python3; do
    if [ -x "$c" ]; then echo "$c"; return 0; fi
  done
  return 1
}

VENV="$ROOT/var/venv"
if [ ! -x "$VENV/bin/python" ]; then
  PY="$(find_python)" || {
    echo "ERROR: this service needs Python 3.12 or newer (Django 6). None was found on PATH" >&2
    echo "       (python3.13, python3.12, python3) or under ~/.pyenv/versions. Install one and retry." >&2
    exit 3
  }
  echo "setup: creating var/venv with $PY"
  "$PY" -m venv "$VENV"
fi
STAMP="$VENV/.lock-installed"
if [ ! -f "$STAMP" ] || ! cmp -s .ci/requirements.lock "$STAMP"; then
  echo "setup: installing locked dependencies (.ci/requirements.lock)"
  # (this machine's pip config names extra local indexes; their "ignored" notes are noise)
  "$VENV/bin/python" -m pip install -q --upgrade pip 2>&1 | { grep -v "^WARNING: Location" || true; }
  "$VENV/bin/python" -m pip install -q -r .ci/requirements.lock 2>&1 | { grep -v "^WARNING: Location" || true; }
  "$VENV/bin/python" -c "import django, rest_framework, celery, psycopg" || {
    echo "ERROR: dependency install failed (see above)" >&2; exit 3; }
  cp .ci/requirements.lock "$STAMP"
fi
export PATH="$VENV/bin:$PATH"
PYTHON="$VENV/bin/python"
