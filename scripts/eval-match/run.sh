#!/usr/bin/env bash
# Prints the matching figures on the evaluation sets in fixtures/match/eval/
# (recall, wrong, guessed, truth in the top 3 of review rows, per rule).
# Regenerate the sets first with: python3 scripts/eval-match/make_sets.py
# REGIONKEY_EVAL_BIN=path/to/regionkey scores that binary instead of the
# test build (the floors asserted are those of this checkout).
set -euo pipefail
cd "$(dirname "$0")/../.."
cargo test --test match evaluation -- --nocapture --test-threads 1 2>&1 \
    | grep -v -E '^  (missed|guessed) '
