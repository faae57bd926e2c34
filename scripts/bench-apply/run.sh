#!/bin/sh
# Benchmark `regionkey apply` on 10,000,000 rows (release binary).
#
#   scripts/bench-apply/run.sh [WORKDIR]
#
# Generates the inputs once (scripts/bench-apply/generate.py), builds the
# release binary, then runs apply under `/usr/bin/time -v` and prints the wall
# time and peak resident memory. Goal on a 2-core machine: under 5 s wall and
# under 4 GiB peak. Set CROSSWALK=path to use another crosswalk (e.g. the
# shipped crosswalks/us-counties-2017-2023.csv) instead of the generated one.
set -eu
work=${1:-/tmp/regionkey-bench-apply}
root=$(cd "$(dirname "$0")/../.." && pwd)
target=${CARGO_TARGET_DIR:-$root/target}
[ -f "$work/data.csv" ] || python3 "$root/scripts/bench-apply/generate.py" "$work"
(cd "$root" && cargo build --release --quiet)
crosswalk=${CROSSWALK:-$work/crosswalk.csv}
/usr/bin/time -v "$target/release/regionkey" apply "$work/data.csv" \
    --crosswalk "$crosswalk" --code-column code --period-column period \
    --sum a,b,c --output "$work/out.csv" --report "$work/report.csv" \
    2> "$work/time.txt" || { cat "$work/time.txt"; exit 1; }
grep -E "regionkey apply|allocated|Elapsed \(wall|Maximum resident" "$work/time.txt"
ls -l "$work/data.csv" "$work/out.csv"
