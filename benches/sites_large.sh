#!/usr/bin/env bash
# End-to-end benchmark of `pondus sites` on a large invented CSV (issue 20).
# Writes a seeded, invented file of N participant rows in 1,000 sites
# (benches/sites_data.py; site, x, w, y), then times, alternating, RUNS runs
# each of:
#   sites   pondus sites FILE --site site --x x --y y --w w --out OUT -q
#   csv     benches/csv_pass: one single-threaded csv-crate pass parsing
#           every numeric field with str::parse::<f64> (the yardstick)
#   pandas  benches/sites_pandas.py: the same per-site moments (n, means and
#           centred co-moments of x, w, x*w, y) by a pandas groupby, and the
#           per-site slopes from them
# Each run's wall time, user and system CPU time and peak memory come from
# /usr/bin/time; the summary gives min and median per command. The per-site
# slope and product-term coefficient of pandas are checked against pondus's
# effects file (relative difference at most 1e-9), so both did the same work.
# Outputs go only to a temporary folder, deleted at the end.
# Usage: bash benches/sites_large.sh [N] [RUNS]   (defaults: 10000000 5)
# VENV: a Python virtual environment with pandas and numpy (default
# /tmp/venv-sites; made with pip when it has no pandas). BASE_BIN: an earlier
# pondus binary timed in the same session (base-sites). NO_BUILD=1 skips the
# pondus build.
set -euo pipefail
cd "$(dirname "$0")/.."
n=${1:-10000000}
runs=${2:-5}
venv=${VENV:-/tmp/venv-sites}
[ -n "${NO_BUILD:-}" ] || nice -n 10 cargo build --release --quiet --bin pondus
nice -n 10 cargo build --release --quiet --offline --manifest-path benches/csv_pass/Cargo.toml \
  --target-dir target/csv_pass
if ! "$venv/bin/python" -c 'import pandas, numpy' 2>/dev/null; then
  python3 -m venv "$venv"
  "$venv/bin/pip" install --quiet pandas numpy
fi
bin=${PONDUS_BIN:-./target/release/pondus}
pass=./target/csv_pass/release/csv_pass
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
python3 benches/sites_data.py "$n" "$dir/rows.csv"
printf 'N = %s rows (%s bytes), %s runs each, %s\n' "$n" "$(stat -c %s "$dir/rows.csv")" "$runs" "$(date -u +%FT%TZ)"
printf 'machine: %s cores, %s; %s\n' "$(nproc)" "$(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs)" "$(uname -sr)"
printf 'versions: %s; %s; %s\n' "$("$bin" --version)" "$(rustc --version)" \
  "$("$venv/bin/python" -c 'import sys, pandas, numpy; print(f"Python {sys.version.split()[0]}, pandas {pandas.__version__}, numpy {numpy.__version__}")')"
printf 'load average before: %s\n' "$(cut -d' ' -f1-3 /proc/loadavg)"
log="$dir/times.txt"
kinds=(sites csv pandas)
[ -z "${BASE_BIN:-}" ] || kinds=(base-sites sites csv pandas)
for run in $(seq "$runs"); do
  for what in "${kinds[@]}"; do
    case $what in
      base-sites) cmd=("$BASE_BIN" sites "$dir/rows.csv" --site site --x x --y y --w w --out "$dir/base.csv" -q) ;;
      sites) cmd=("$bin" sites "$dir/rows.csv" --site site --x x --y y --w w --out "$dir/effects.csv" -q) ;;
      csv) cmd=("$pass" "$dir/rows.csv") ;;
      pandas) cmd=("$venv/bin/python" benches/sites_pandas.py "$dir/rows.csv" "$dir/pandas.csv") ;;
    esac
    /usr/bin/time -o "$dir/t" -f "%e %U %S %M" "${cmd[@]}" > "$dir/stdout.txt"
    read -r wall user sys rss < "$dir/t"
    printf '%s %s %s %s %s\n' "$what" "$wall" "$user" "$sys" "$rss" >> "$log"
    printf '  run %s %-10s %6s s wall %6s s user %6s s sys %8s KB max RSS\n' "$run" "$what" "$wall" "$user" "$sys" "$rss"
  done
done
printf 'load average after: %s\n' "$(cut -d' ' -f1-3 /proc/loadavg)"
# The same numbers: pandas's slopes and product-term coefficients against
# pondus's effects file (and the base binary's, when timed).
python3 - "$dir/pandas.csv" "$dir/effects.csv" ${BASE_BIN:+"$dir/base.csv"} <<'EOF'
import csv, sys
ref = {r["site"]: r for r in csv.DictReader(open(sys.argv[1]))}
for path in sys.argv[2:]:
    rows = list(csv.DictReader(open(path)))
    assert len(rows) == len(ref), (len(rows), len(ref))
    worst = 0.0
    for r in rows:
        p = ref[r["study"]]
        assert int(p["n"]) == int(r["n"]), r["study"]
        for ours, theirs in (("slope", "slope"), ("interaction", "interaction")):
            a, b = float(r[ours]), float(p[theirs])
            worst = max(worst, abs(a - b) / max(abs(b), 1e-300))
    verdict = "agree" if worst <= 1e-9 else "DIFFER"
    print(f"{path.rsplit('/', 1)[-1]}: {len(rows)} sites; slopes and product terms {verdict} with pandas (max relative difference {worst:.1e})")
    if worst > 1e-9:
        sys.exit(1)
EOF
if [ -n "${BASE_BIN:-}" ]; then
  python3 - "$dir/base.csv" "$dir/effects.csv" <<'EOF'
import csv, sys
a = list(csv.reader(open(sys.argv[1])))
b = list(csv.reader(open(sys.argv[2])))
assert a[0] == b[0] and len(a) == len(b)
worst = max((abs(float(x) - float(y)) / max(abs(float(x)), 1e-300)
             for r, s in zip(a[1:], b[1:]) for x, y in zip(r[1:], s[1:])), default=0.0)
print(f"effects file against the base binary's: max relative difference {worst:.1e} (every number column)")
EOF
fi
echo "summary (min / median of wall, user and user + sys seconds; max RSS MB):"
python3 benches/summarise_times.py "$log" "${kinds[@]}"
