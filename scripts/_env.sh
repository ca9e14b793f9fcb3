# Shared by scripts/demo, scripts/test and scripts/bench: make .venv and install the
# package into it when absent or when pyproject.toml changed since the last install.
set -euo pipefail
ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
VENV="$ROOT/.venv"
PY="${PYTHON:-python3}"
if [ ! -x "$VENV/bin/python" ]; then
  echo "creating $VENV" >&2
  "$PY" -m venv "$VENV"
fi
STAMP="$VENV/.cogendispatch-installed"
HASH="$(sha256sum "$ROOT/pyproject.toml" | cut -d' ' -f1)"
if [ ! -f "$STAMP" ] || [ "$(cat "$STAMP")" != "$HASH" ]; then
  echo "installing cogendispatch and its dependencies into $VENV" >&2
  "$VENV/bin/python" -m pip install --quiet --upgrade pip >&2
  "$VENV/bin/python" -m pip install --quiet -e "$ROOT[test]" >&2
  echo "$HASH" > "$STAMP"
fi
export PATH="$VENV/bin:$PATH"
