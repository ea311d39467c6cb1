#!/usr/bin/env bash
# End-to-end benchmark of `pondus fit` on large invented CSV files:
# wall time and peak memory (max RSS) of the whole command, 3 runs each.
# Usage: bash benches/end_to_end.sh [N ...]   (default: 100000 1000000)
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
sizes=("$@")
[ ${#sizes[@]} -gt 0 ] || sizes=(100000 1000000)
for n in "${sizes[@]}"; do
  python3 benches/make_large_csv.py "$n" "$dir/data.csv"
  printf 'k = %s (%s bytes)\n' "$n" "$(stat -c %s "$dir/data.csv")"
  for run in 1 2 3; do
    /usr/bin/time -f "  run $run: %e s wall, %U s user, %M KB max RSS" \
      ./target/release/pondus fit "$dir/data.csv" --moderator m1 --moderator m2 --moderator m3 --quiet
  done
done
