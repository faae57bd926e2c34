#!/bin/sh
# Benchmark of `regionkey overlay` on the full US county layers, 2017 -> 2023
# (3,231 x 3,233 features), with the release binary.
#
#   scripts/bench-overlay.sh [RUNS]
#
# Prints wall time and peak resident memory of each run (GNU time -v), then
# checks accuracy: a run with --min-share 0 (no sliver removal) against the
# independent reference fixtures/geometry/reference-weights-us-2017-2023.csv
# (shapely + GeographicLib, rings densified to 0.001 deg; see
# scripts/geometry/reference_weights.py). Goal: < 0.5 s wall, < 200 MB peak,
# every weight >= 1e-4 within 1e-6 of the reference.
#
# Needs /usr/bin/time (GNU) and python3. Honours CARGO_TARGET_DIR.
set -eu
cd "$(dirname "$0")/.."
RUNS=${1:-5}
cargo build --release --bin regionkey >&2
TARGET=${CARGO_TARGET_DIR:-target}
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
# A private copy: a shared target folder may be rebuilt under us.
cp "$TARGET/release/regionkey" "$WORK/regionkey"
echo "machine: $(nproc) cores; $(uname -sm)"
i=1
while [ "$i" -le "$RUNS" ]; do
    /usr/bin/time -v "$WORK/regionkey" -q overlay builtin:counties-2017 builtin:counties-2023 \
        --output "$WORK/xw.csv" 2> "$WORK/time.txt"
    wall=$(grep "Elapsed (wall clock)" "$WORK/time.txt" | awk '{print $NF}')
    rss=$(grep "Maximum resident set size" "$WORK/time.txt" | awk '{print $NF}')
    echo "run $i: wall $wall, peak RSS $((rss / 1024)) MB"
    i=$((i + 1))
done
cmp -s "$WORK/xw.csv" crosswalks/us-counties-2017-2023.csv \
    && echo "output identical to crosswalks/us-counties-2017-2023.csv" \
    || echo "output DIFFERS from crosswalks/us-counties-2017-2023.csv"
"$WORK/regionkey" -q overlay builtin:counties-2017 builtin:counties-2023 --min-share 0 \
    --output "$WORK/raw.csv" 2> /dev/null
python3 scripts/geometry/compare_weights.py "$WORK/raw.csv" \
    fixtures/geometry/reference-weights-us-2017-2023.csv 1e-4 1e-6 || true
