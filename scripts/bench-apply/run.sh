#!/bin/sh
# Benchmark of `regionkey apply` against a peer in the same run, at two
# sizes: DuckDB running the query that `regionkey apply --emit-sql duckdb`
# writes for the same allocation (duckdb_apply.py: CSV in, CSV out, as the
# command). Release build; ratios hold, absolute times do not.
#
#   scripts/bench-apply/run.sh [PERIODS...]      # from anywhere
#
#   PERIODS    sizes, in periods of the 3,231 codes of 2017 (default
#              "310 3095": 1,001,610 and 10,000,000 rows)
#   RUNS       timed runs of each program per size (default 3; the fastest
#              wall time is shown, with its CPU time, and the largest memory)
#   PYTHON     a Python with duckdb (default: the virtual environment
#              target/bench-venv, made with pip if absent)
#   REGIONKEY  a regionkey binary to time instead of building the release one
#   WORK       where the generated inputs are kept (default
#              /tmp/regionkey-bench-apply; about 190 MB at 10M rows)
#
# Inputs come from generate.py (three count columns, about 1 in 1,000 values
# missing; a stand-in crosswalk splitting every 40th code). Both programs
# read data.csv and crosswalk.csv and write one row per target and period
# with each count and its coverage. At the smallest size check.py compares
# the two outputs (same rows, figures within 1e-9 relative). Goal (issue 8):
# 10,000,000 rows x 3 counts in under 5 s wall and 4 GiB on 2 cores.
# Needs GNU time (/usr/bin/time).
set -eu
root=$(cd "$(dirname "$0")/../.." && pwd)
cd "$root"
SIZES=${*:-"310 3095"}
RUNS=${RUNS:-3}
WORK=${WORK:-/tmp/regionkey-bench-apply}
mkdir -p "$WORK"
if [ -z "${PYTHON:-}" ]; then
    venv=target/bench-venv
    [ -x "$venv/bin/python" ] || python3 -m venv "$venv"
    "$venv/bin/python" -c "import duckdb" 2>/dev/null ||
        "$venv/bin/python" -m pip install --quiet --disable-pip-version-check duckdb
    PYTHON=$venv/bin/python
fi
if [ -n "${REGIONKEY:-}" ]; then
    cp "$REGIONKEY" "$WORK/regionkey"
else
    cargo build --release --quiet --bin regionkey
    # A private copy: a shared target folder may be rebuilt under us.
    cp "${CARGO_TARGET_DIR:-target}/release/regionkey" "$WORK/regionkey"
fi
RK="$WORK/regionkey"

# time_of PREFIX CMD...: runs CMD under GNU time; prints "wall cpu MB".
time_of() {
    prefix=$1
    shift
    /usr/bin/time -f '%e %U %S %M' -o "$prefix.time" "$@" > /dev/null 2> "$prefix.err" || {
        cat "$prefix.err" "$prefix.time" >&2
        exit 1
    }
    awk '{ printf "%.2f %.2f %d\n", $1, $2 + $3, $4 / 1024 }' "$prefix.time"
}

# best FILE: the fastest wall time with its CPU time, and the largest memory.
best() {
    sort -n "$1" | awk 'NR == 1 { w = $1; c = $2 } { if ($3 > m) m = $3 } END { printf "%s %s %s", w, c, m }'
}

echo "machine: $(nproc) cores; $(uname -sm); $("$PYTHON" -c 'import duckdb; print("duckdb", duckdb.__version__)'); runs per size: $RUNS"
printf '%-11s %-26s %-26s %-14s %s\n' rows "regionkey wall/cpu/peak" "DuckDB wall/cpu/peak" "ratio wall/cpu" check
first=1
for periods in $SIZES; do
    dir="$WORK/p$periods"
    mkdir -p "$dir"
    [ -f "$dir/data.csv" ] || python3 scripts/bench-apply/generate.py "$dir" "$periods" > /dev/null
    rows=$(($(wc -l < "$dir/data.csv") - 1))
    set -- "$dir/data.csv" --crosswalk "$dir/crosswalk.csv" --code-column code \
        --period-column period --sum a --sum b --sum c
    "$RK" apply "$@" --emit-sql duckdb --output "$dir/query.sql" --quiet
    : > "$dir/rk.t"
    : > "$dir/db.t"
    i=1
    while [ "$i" -le "$RUNS" ]; do
        time_of "$dir/rk" "$RK" apply "$@" --output "$dir/out.csv" --report "$dir/report.csv" --quiet >> "$dir/rk.t"
        time_of "$dir/db" "$PYTHON" scripts/bench-apply/duckdb_apply.py "$dir/data.csv" \
            "$dir/crosswalk.csv" "$dir/query.sql" "$dir/peer.csv" >> "$dir/db.t"
        i=$((i + 1))
    done
    set -- $(best "$dir/rk.t") $(best "$dir/db.t")
    check=-
    if [ "$first" = 1 ]; then
        check=$("$PYTHON" scripts/bench-apply/check.py "$dir/out.csv" "$dir/peer.csv" code period)
        first=0
    fi
    printf '%-11s %-26s %-26s %-14s %s\n' "$rows" "$1 s / $2 s / $3 MB" "$4 s / $5 s / $6 MB" \
        "$(awk "BEGIN { printf \"%.2f / %.2f\", $1 / $4, $2 / $5 }")" "$check"
    rm -f "$dir/out.csv" "$dir/peer.csv"
done
echo "ratio < 1: regionkey faster. Wall times mean little while other work runs; CPU times hold better."
