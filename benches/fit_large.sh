#!/usr/bin/env bash
# End-to-end benchmark of `pondus fit` on a large invented CSV (issue 20).
# Writes a seeded, invented file of N studies with three numeric moderators
# (benches/make_large_csv.py), then times, alternating, RUNS runs each of:
#   quiet  pondus fit FILE --moderator m1 --moderator m2 --moderator m3 --quiet
#   json   the same with --json OUT (OUT in a temporary folder)
#   csv    benches/csv_pass: one single-threaded csv-crate pass parsing
#          every numeric field with str::parse::<f64> (the yardstick)
#   numpy  benches/reml_numpy.py (with NUMPY_PYTHON=a python that has numpy,
#          scipy and pandas): the competing general-purpose script
#   cat    with CATEGORICAL=1: `quiet` with --categorical m3 (p = 6)
# Each run's wall time, user and system CPU time and peak memory come from
# /usr/bin/time; the summary gives min and median per command. On a shared
# machine the CPU times are the steadier figures (wall time includes waiting
# for a core; system time is mostly page faults of fresh memory).
# Usage: bash benches/fit_large.sh [N] [RUNS]   (defaults: 1000000 5)
# (QUIET_ONLY=1 leaves out the --json runs.)
set -euo pipefail
cd "$(dirname "$0")/.."
n=${1:-1000000}
runs=${2:-5}
# The binary users get (no dev-dependencies), and the yardstick, a crate
# of its own (benches/csv_pass) built into its own target folder.
# (NO_BUILD=1 skips the pondus build, to time binaries given below.)
[ -n "${NO_BUILD:-}" ] || nice -n 10 cargo build --release --quiet --bin pondus
nice -n 10 cargo build --release --quiet --offline --manifest-path benches/csv_pass/Cargo.toml \
  --target-dir target/csv_pass
# PONDUS_BIN: another binary to time (e.g. a copy of an earlier build).
bin=${PONDUS_BIN:-./target/release/pondus}
pass=./target/csv_pass/release/csv_pass
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
python3 benches/make_large_csv.py "$n" "$dir/data.csv"
printf 'k = %s (%s bytes), %s runs each, %s\n' "$n" "$(stat -c %s "$dir/data.csv")" "$runs" "$(date -u +%FT%TZ)"
log="$dir/times.txt"
# BASE_BIN: an earlier binary timed in the same session (base-quiet, base-json).
kinds=(quiet json csv)
[ -z "${BASE_BIN:-}" ] || kinds=(base-quiet base-json quiet json csv)
# QUIET_ONLY=1: no --json runs (each writes a ~450 MB file; for short disks).
if [ -n "${QUIET_ONLY:-}" ]; then
  kinds=(quiet csv)
  [ -z "${BASE_BIN:-}" ] || kinds=(base-quiet quiet csv)
fi
[ -z "${CATEGORICAL:-}" ] || kinds+=(cat)
[ -z "${NUMPY_PYTHON:-}" ] || kinds+=(numpy)
for run in $(seq "$runs"); do
  for what in "${kinds[@]}"; do
    case $what in
      base-quiet) cmd=("$BASE_BIN" fit "$dir/data.csv" --moderator m1 --moderator m2 --moderator m3 --quiet) ;;
      base-json) cmd=("$BASE_BIN" fit "$dir/data.csv" --moderator m1 --moderator m2 --moderator m3 --quiet --json "$dir/base.json") ;;
      quiet) cmd=("$bin" fit "$dir/data.csv" --moderator m1 --moderator m2 --moderator m3 --quiet) ;;
      json) cmd=("$bin" fit "$dir/data.csv" --moderator m1 --moderator m2 --moderator m3 --quiet --json "$dir/out.json") ;;
      csv) cmd=("$pass" "$dir/data.csv") ;;
      cat) cmd=("$bin" fit "$dir/data.csv" --moderator m1 --moderator m2 --moderator m3 --categorical m3 --quiet) ;;
      numpy) cmd=("$NUMPY_PYTHON" benches/reml_numpy.py "$dir/data.csv") ;;
    esac
    /usr/bin/time -o "$dir/t" -f "%e %U %S %M" "${cmd[@]}" > /dev/null
    read -r wall user sys rss < "$dir/t"
    printf '%s %s %s %s %s\n' "$what" "$wall" "$user" "$sys" "$rss" >> "$log"
    printf '  run %s %-10s %6s s wall %6s s user %6s s sys %8s KB max RSS\n' "$run" "$what" "$wall" "$user" "$sys" "$rss"
  done
done
echo "summary (min / median of wall, user and user + sys seconds; max RSS MB):"
if [ -n "${BASE_BIN:-}" ] && [ -z "${QUIET_ONLY:-}" ]; then
  cmp -s "$dir/base.json" "$dir/out.json" && echo "JSON identical to the base binary's" \
    || echo "JSON DIFFERS from the base binary's"
fi
if [ -n "${NUMPY_PYTHON:-}" ]; then
  # The script's numbers against pondus's JSON of the same file.
  [ -f "$dir/out.json" ] || "$bin" fit "$dir/data.csv" --moderator m1 --moderator m2 --moderator m3 \
    --quiet --json "$dir/out.json"
  "$NUMPY_PYTHON" benches/reml_numpy.py "$dir/data.csv" "$dir/out.json" | python3 -c '
import json, sys
d = json.load(sys.stdin)
print("numpy script", d["versions"], "largest relative difference from pondus: %.1e" % d["max_rel_diff_from_pondus"])'
fi
python3 benches/summarise_times.py "$log" "${kinds[@]}"
