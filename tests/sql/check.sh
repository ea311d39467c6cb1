#!/usr/bin/env bash
# Run the query that `pondus sql` prints on a real SQL engine (DuckDB, pinned
# in tests/sql/requirements.txt) and check that `pondus sites --moments` on its
# result agrees with the streaming `pondus sites` on the same rows to 1e-9.
#
#   bash tests/sql/check.sh
#   SQL_VENV=/some/dir PYTHON=python3.11 bash tests/sql/check.sh
#
# Needs python3 with venv and pip (PyPI reachable the first time); the venv is
# made at ${SQL_VENV:-target/sql-venv} and reused.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
cd "$root"
python="${PYTHON:-python3.11}"
venv="${SQL_VENV:-target/sql-venv}"
die() { echo "tests/sql/check.sh: $*" >&2; exit 1; }
command -v "$python" >/dev/null 2>&1 || die "$python not found (set PYTHON=...)"
if [ ! -x "$venv/bin/python" ]; then
    echo "creating venv at $venv"
    "$python" -m venv "$venv" || die "could not create venv at $venv"
fi
"$venv/bin/python" -m pip install --quiet --disable-pip-version-check -r "$here/requirements.txt" \
    || die "pip install -r tests/sql/requirements.txt failed"
cargo build --quiet --bin pondus || die "cargo build failed"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
"$venv/bin/python" "$here/check.py" "$root/target/debug/pondus" "$tmp"
