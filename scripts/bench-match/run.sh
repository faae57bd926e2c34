#!/bin/sh
# Benchmark of `regionkey match` end to end: 1,000,000 messy rows, CSV in ->
# CSV out, release build. Reports wall time and peak memory (maximum
# resident set size) from /usr/bin/time -v.
#
#   sh scripts/bench-match/run.sh            # from the repository root
#
# Goal: under 3 s wall and under 1 GiB peak on a 2-core machine.
#
# Measured on the 2-core development machine (seed 2023; 73,117 distinct
# (name, state) pairs), distinct names resolved on both cores: 2.1-2.3 s
# wall, 328 MB peak resident; 0 wrong fuzzy matches; 5 rows "wrong"
# where a generated typo of Cooke County is the real Coke County, TX.
set -eu
WORK=${WORK:-/tmp/regionkey-bench-match}
mkdir -p "$WORK"
# BIN=path/to/regionkey skips the build and times that binary instead.
if [ -z "${BIN:-}" ]; then
    cargo build --release --bin regionkey
    BIN=${CARGO_TARGET_DIR:-target}/release/regionkey
fi
[ -f "$WORK/input.csv" ] || python3 scripts/bench-match/generate.py "$WORK/input.csv" 1000000 2023
/usr/bin/time -v "$BIN" match "$WORK/input.csv" --name-column county_name --state-column state \
    --output "$WORK/output.csv" --review "$WORK/review.csv" 2>"$WORK/time.txt" || { cat "$WORK/time.txt"; exit 1; }
grep -E "regionkey match|matched|review |unmatched|Elapsed|Maximum resident" "$WORK/time.txt"
wc -l "$WORK/input.csv" "$WORK/output.csv" "$WORK/review.csv"
# Matched rows whose code differs from the code the name was generated from.
python3 - "$WORK/output.csv" <<'PY'
import csv, sys
wrong = total = 0
for r in csv.DictReader(open(sys.argv[1], encoding="utf-8")):
    if r["match_status"] == "matched" and r["true_code"]:
        total += 1
        wrong += r["code"] != r["true_code"]
print(f"matched rows with a known code: {total}; wrong: {wrong}")
PY
