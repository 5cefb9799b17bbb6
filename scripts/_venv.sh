# Shared by scripts/demo and scripts/test: build .venv once, install the project.
# Usage: . scripts/_venv.sh EXTRAS   (EXTRAS like "test" or "" )
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
venv="$root/.venv"
extras="${1:-}"
stamp="$venv/.installed-${extras:-base}"
if [ ! -x "$venv/bin/python" ]; then
    echo "driftline: creating $venv" >&2
    python3 -m venv "$venv"
fi
if [ ! -f "$stamp" ] || [ "$root/pyproject.toml" -nt "$stamp" ]; then
    echo "driftline: installing the project${extras:+ with [$extras]} into .venv" >&2
    spec="$root"
    [ -n "$extras" ] && spec="$root[$extras]"
    "$venv/bin/python" -m pip install --quiet --disable-pip-version-check -e "$spec" >&2
    touch "$stamp"
fi
