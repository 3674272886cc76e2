#!/usr/bin/env bash
# Runs each cargo-fuzz (libFuzzer) target for a bounded time, then minimises its corpus.
#   scripts/fuzz.sh                      # every target, 60 s each
#   FUZZ_SECONDS=600 scripts/fuzz.sh time_to_event_csv duration
# Needs the nightly toolchain and cargo-fuzz (`cargo install cargo-fuzz`); without them the
# script says so and exits 0: the committed corpus and fuzz/regressions/ still run in the
# normal `cargo test --release` (tests/fuzz_regressions.rs). CI does not run the fuzzers.
# Inputs that break an invariant land in fuzz/artifacts/<target>/; copy each into
# fuzz/regressions/<target>/ (replayed by the tests), fix the bug, and list it in docs/robustness.md.
set -uo pipefail
cd "$(dirname "$0")/../fuzz"
SECONDS_EACH=${FUZZ_SECONDS:-60}
ALL_TARGETS="time_to_event_csv duration life_table digitised fit_small"
TARGETS=${*:-$ALL_TARGETS}

if ! cargo +nightly --version >/dev/null 2>&1; then
    echo "fuzz.sh: no nightly toolchain (rustup toolchain install nightly); fuzzers not run."
    echo "The committed corpus and regressions run in cargo test --release instead."
    exit 0
fi
if ! cargo +nightly fuzz --version >/dev/null 2>&1; then
    echo "fuzz.sh: cargo-fuzz is not installed (cargo install cargo-fuzz); fuzzers not run."
    echo "The committed corpus and regressions run in cargo test --release instead."
    exit 0
fi

status=0
printf '| target | seconds run | executions | crashes |\n|---|---|---|---|\n'
for target in $TARGETS; do
    mkdir -p "corpus/$target" "seeds/$target" "artifacts/$target"
    log=$(mktemp)
    before=$(find "artifacts/$target" -type f | wc -l)
    started=$(date +%s)
    # New interesting inputs go to the first folder (the corpus); seeds are only read.
    cargo +nightly fuzz run "$target" "corpus/$target" "seeds/$target" -- \
        -max_total_time="$SECONDS_EACH" -rss_limit_mb=2048 -timeout=20 -print_final_stats=1 \
        >"$log" 2>&1 || status=1
    elapsed=$(($(date +%s) - started))
    runs=$(awk '/stat::number_of_executed_units/ {print $2}' "$log" | tail -1)
    after=$(find "artifacts/$target" -type f | wc -l)
    printf '| %s | %s | %s | %s |\n' "$target" "$elapsed" "${runs:-?}" "$((after - before))"
    if grep -q "ERROR: libFuzzer\|panicked at" "$log"; then
        grep -m3 "panicked at\|ERROR" "$log" >&2
    fi
    rm -f "$log"
    cargo +nightly fuzz cmin "$target" "corpus/$target" >/dev/null 2>&1 || status=1
done
exit $status
