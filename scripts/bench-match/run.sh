#!/bin/sh
# Benchmark of `regionkey match` end to end: messy county names, CSV in ->
# CSV out (plus the review list), release build, against a peer in the same
# run: the release binary of an earlier commit (PEER, default e22e4da, the
# matcher before the abbreviation, description and edit-distance rules).
#
#   sh scripts/bench-match/run.sh            # from the repository root
#
# Prints one table: sizes 100,000 and 1,000,000 rows (SIZES), threads 1 and
# 2 (RAYON_NUM_THREADS), for this tree and the peer: wall seconds, CPU
# seconds (user + system) and peak resident memory, the best wall of REPEATS
# runs (default 3) with the CPU and memory of that run. Then checks that the
# output bytes with 1 and 2 threads are equal (cmp), and counts matched rows
# whose code differs from the code the generator made the name from.
#
# Goal (issue 7): 1,000,000 rows at most 1.5 s wall on 2 cores, at most
# 1 GiB peak, the same bytes with 1 and 2 threads.
#
# Measured 2026-12-03 with nothing else running (load average 1.0-1.4),
# best of 3, against the release binary of 58fcb9d (the matcher before the
# nearer-name check): PEER=58fcb9d PEER_BIN=<that binary>
#   rows       binary        threads   wall_s    cpu_s   peak_MB
#   100000     this                1     0.31     0.31        76
#   100000     this                2     0.22     0.32        77
#   100000     peer 58fcb9d        1     0.29     0.28        73
#   100000     peer 58fcb9d        2     0.20     0.28        74
#   1000000    this                1     1.82     1.77       352
#   1000000    this                2     1.34     1.88       354
#   1000000    peer 58fcb9d        1     1.79     1.73       348
#   1000000    peer 58fcb9d        2     1.29     1.73       350
# Output and review bytes equal with 1 and 2 threads (both binaries);
# 5 matched rows differ from the generator's code (generated typos of
# Cooke County, 48097, that are the real Coke County, TX, 48081). An
# earlier run against e22e4da (before the abbreviation, description and
# edit-distance rules), at a load of 1.5-2.1: 1.46 s this, 1.40 s peer.

# BIN=path/to/regionkey skips the build of this tree; PEER_BIN=path skips
# the peer's build. The peer is built in a temporary git worktree into this
# tree's target folder (CARGO_TARGET_DIR), so it reuses the dependencies
# already compiled there, and copied to target/bench-peer/; the worktree is
# removed afterwards.
set -eu
root=$(cd "$(dirname "$0")/../.." && pwd)
cd "$root"
WORK=${WORK:-/tmp/regionkey-bench-match}
SIZES=${SIZES:-"100000 1000000"}
REPEATS=${REPEATS:-3}
PEER=${PEER:-e22e4da}
target=${CARGO_TARGET_DIR:-$root/target}
mkdir -p "$WORK" "$target/bench-peer"

if [ -z "${BIN:-}" ]; then
    cargo build --release --quiet --bin regionkey
    mkdir -p "$target/bench-this"
    cp "$target/release/regionkey" "$target/bench-this/regionkey"
    BIN=$target/bench-this/regionkey
fi
if [ -z "${PEER_BIN:-}" ]; then
    PEER_BIN=$target/bench-peer/regionkey-$PEER
    if [ ! -x "$PEER_BIN" ]; then
        tree=$(mktemp -d /tmp/regionkey-peer-XXXXXX)
        rmdir "$tree"
        git worktree add --detach --quiet "$tree" "$PEER"
        (cd "$tree" && CARGO_TARGET_DIR=$target cargo build --release --quiet --bin regionkey)
        cp "$target/release/regionkey" "$PEER_BIN"
        git worktree remove --force "$tree"
        # The build above replaced target/release/regionkey with the peer's.
        [ "$BIN" = "$target/release/regionkey" ] && cargo build --release --quiet --bin regionkey
    fi
fi

for rows in $SIZES; do
    [ -f "$WORK/input-$rows.csv" ] ||
        python3 scripts/bench-match/generate.py "$WORK/input-$rows.csv" "$rows" 2023
done

# One timed run: prints "wall cpu peak_kb".
timed() {
    threads=$1 bin=$2 input=$3 out=$4
    RAYON_NUM_THREADS=$threads /usr/bin/time -f '%e %U %S %M' -o "$WORK/time.txt" \
        "$bin" match "$input" --name-column county_name --state-column state \
        --output "$out" --review "$out.review.csv" --quiet
    awk '{ printf "%s %.2f %s\n", $1, $2 + $3, $4 }' "$WORK/time.txt"
}

printf '%-10s %-13s %7s %8s %8s %9s\n' rows binary threads wall_s cpu_s peak_MB
for rows in $SIZES; do
    input=$WORK/input-$rows.csv
    for which in this peer; do
        if [ "$which" = this ]; then bin=$BIN; else bin=$PEER_BIN; fi
        for threads in 1 2; do
            best=""
            i=0
            while [ "$i" -lt "$REPEATS" ]; do
                r=$(timed "$threads" "$bin" "$input" "$WORK/out-$which-$rows-t$threads.csv")
                best=$(printf '%s\n%s\n' "$best" "$r" | awk 'NF' | sort -n | head -n 1)
                i=$((i + 1))
            done
            label=$which
            [ "$which" = peer ] && label="peer $PEER"
            echo "$best" | awk -v r="$rows" -v b="$label" -v t="$threads" \
                '{ printf "%-10s %-13s %7s %8.2f %8.2f %9.0f\n", r, b, t, $1, $2, $3 / 1024 }'
        done
        if cmp -s "$WORK/out-$which-$rows-t1.csv" "$WORK/out-$which-$rows-t2.csv" &&
            cmp -s "$WORK/out-$which-$rows-t1.csv.review.csv" "$WORK/out-$which-$rows-t2.csv.review.csv"; then
            echo "           $which, $rows rows: output and review bytes equal with 1 and 2 threads"
        else
            echo "           $which, $rows rows: OUTPUT DIFFERS between 1 and 2 threads"
            [ "$which" = this ] && exit 1
        fi
    done
done
echo "load average during the run: $(cut -d' ' -f1-3 /proc/loadavg)"

# Matched rows whose code differs from the code the name was generated from
# (this tree, the largest size).
last=$(echo "$SIZES" | awk '{ print $NF }')
python3 - "$WORK/out-this-$last-t2.csv" <<'PY'
import csv, sys
wrong = total = 0
for r in csv.DictReader(open(sys.argv[1], encoding="utf-8")):
    if r["match_status"] == "matched" and r["true_code"]:
        total += 1
        wrong += r["code"] != r["true_code"]
print(f"this tree: matched rows with a known code: {total}; code differs from the generator's: {wrong}")
PY
