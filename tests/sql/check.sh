#!/usr/bin/env bash
# Run the query that `pondus sql --engine E` prints on real SQL engines and
# check that `pondus sites --moments` on its result agrees with the streaming
# `pondus sites` on the same rows to 1e-9: DuckDB, SQLite (rows stored as
# numbers and as text), PostgreSQL and Spark SQL, pinned in
# tests/sql/requirements.txt (SQLite is Python's own).
#
#   bash tests/sql/check.sh                  # every engine
#   bash tests/sql/check.sh duckdb sqlite    # some
#   SQL_VENV=/some/dir PYTHON=python3.11 bash tests/sql/check.sh
#
# Needs python3 with venv and pip (PyPI reachable the first time); the venv is
# made at ${SQL_VENV:-target/sql-venv} and reused. PostgreSQL: a private
# server is started in a temporary folder on a Unix socket (Debian's
# postgresql package is installed when initdb is missing) unless PGHOST is
# set. Spark needs a Java runtime (17 or later; Debian's
# openjdk-17-jre-headless is installed when java is missing).
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
cd "$root"
python="${PYTHON:-python3.11}"
venv="${SQL_VENV:-target/sql-venv}"
die() { echo "tests/sql/check.sh: $*" >&2; exit 1; }
command -v "$python" >/dev/null 2>&1 || die "$python not found (set PYTHON=...)"
engines=("$@")
[ ${#engines[@]} -eq 0 ] && engines=(duckdb sqlite sqlite-text postgres spark)
wants() { local e; for e in "${engines[@]}"; do [ "$e" = "$1" ] && return 0; done; return 1; }

sudo=""
[ "$(id -u)" -ne 0 ] && sudo="sudo"
apt_install() {
    $sudo apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq "$@" >/dev/null
}

if [ ! -x "$venv/bin/python" ]; then
    echo "creating venv at $venv"
    "$python" -m venv "$venv" || die "could not create venv at $venv"
fi
"$venv/bin/python" -m pip install --quiet --disable-pip-version-check -r "$here/requirements.txt" \
    || die "pip install -r tests/sql/requirements.txt failed"
cargo build --quiet --bin pondus || die "cargo build failed"
tmp="$(mktemp -d)"
pgdata=""
cleanup() {
    if [ -n "$pgdata" ]; then
        run_pg "$pgbin/pg_ctl" -D "$pgdata" -m immediate stop >/dev/null 2>&1 || true
    fi
    rm -rf "$tmp"
}
trap cleanup EXIT

# A command as the postgres user when running as root (the server refuses root).
run_pg() {
    if [ "$(id -u)" -eq 0 ]; then runuser -u postgres -- "$@"; else "$@"; fi
}

if wants postgres && [ -z "${PGHOST:-}" ]; then
    initdb="$(ls /usr/lib/postgresql/*/bin/initdb 2>/dev/null | sort -V | tail -1 || true)"
    if [ -z "$initdb" ]; then
        apt_install postgresql
        initdb="$(ls /usr/lib/postgresql/*/bin/initdb | sort -V | tail -1)"
    fi
    pgbin="$(dirname "$initdb")"
    pgdata="$tmp/pg"
    mkdir -p "$pgdata"
    [ "$(id -u)" -eq 0 ] && chown postgres "$tmp" "$pgdata"
    run_pg "$initdb" -D "$pgdata" -A trust -U postgres --no-sync >/dev/null \
        || die "initdb failed"
    run_pg "$pgbin/pg_ctl" -D "$pgdata" -l "$pgdata/log" -w \
        -o "-p 54329 -k $pgdata -c listen_addresses=''" start >/dev/null \
        || { cat "$pgdata/log" >&2; die "the PostgreSQL server did not start"; }
    export PGHOST="$pgdata" PGPORT=54329 PGUSER=postgres
fi

if wants spark; then
    command -v java >/dev/null 2>&1 || apt_install openjdk-17-jre-headless
    export SPARK_LOCAL_IP=127.0.0.1
fi

work="$tmp/work"
mkdir -p "$work"
"$venv/bin/python" "$here/check.py" "$root/target/debug/pondus" "$work" "${engines[@]}" 2> "$tmp/stderr" \
    || { grep -v "WARN\|^Using \|^Setting \|^To adjust" "$tmp/stderr" >&2 || true; exit 1; }
