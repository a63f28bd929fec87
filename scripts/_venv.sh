# Sourced by the scripts: create .venv on first use and install the project into it.
# UPSHOT_VENV overrides the location (CI uses a fresh one).
set -euo pipefail
root=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
venv=${UPSHOT_VENV:-$root/.venv}
stamp=$venv/.installed-$(sha256sum "$root/pyproject.toml" | cut -c1-16)
if [ ! -f "$stamp" ]; then
    python3 -m venv "$venv"
    "$venv/bin/python" -m pip install --quiet --upgrade pip
    "$venv/bin/python" -m pip install --quiet -e "$root[test]"
    touch "$stamp"
fi
export PATH=$venv/bin:$PATH
cd "$root"
