#!/usr/bin/env bash
# Creates (or reuses) the Python venv with the pinned reference libraries used by the outside checks.
# Prints the venv's python path as its last line.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
venv="${SIEVELINE_VENV:-$root/.venv-ref}"
req="$root/tests/reference/requirements.txt"
stamp="$venv/.requirements.sha256"
want="$(sha256sum "$req" | cut -d' ' -f1)"
if [ ! -x "$venv/bin/python" ] || [ "$(cat "$stamp" 2>/dev/null)" != "$want" ]; then
  echo "ref-venv: creating $venv" >&2
  python3 -m venv "$venv"
  "$venv/bin/pip" install -q --disable-pip-version-check -r "$req" >&2
  echo "$want" > "$stamp"
fi
echo "$venv/bin/python"
