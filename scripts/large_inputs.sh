#!/usr/bin/env bash
# Peak memory and wall time of `tunnelcast fit` on large generated inputs (issue 9, item 4).
# Files are generated here, in a temporary folder, from a seeded invented scenario, and deleted
# afterwards; nothing large is committed. Needs /usr/bin/time (GNU time) and python3.
#   scripts/large_inputs.sh            # 1M and 10M records (all families), then 1000 vs 2
#                                      # columns (100k rows, exponential only: reading cost)
#   SIZES="1000000" scripts/large_inputs.sh
# Prints one Markdown table row per run: input, rows, columns, file MB, peak RSS MB, seconds, exit.
set -euo pipefail
cd "$(dirname "$0")/.."
SIZES=${SIZES:-"1000000 10000000"}
WIDE_ROWS=${WIDE_ROWS:-100000}
cargo build --release --quiet
BIN=$PWD/target/release/tunnelcast
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT

# Invented trial: Weibull event times (shape 1.3, scale 400 days) with uniform censoring up to
# 900 days, times rounded to 0.01 day (as exported from a database).
generate() { # rows extra_columns file
    python3 - "$1" "$2" "$3" <<'PY'
import random, sys
rows, extra, path = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3]
rng = random.Random(2026)
filler = ",".join(f"x{i}" for i in range(extra))
with open(path, "w", buffering=1 << 20) as f:
    f.write("time,event" + ("," + filler if extra else "") + "\n")
    pad = ("," + ",".join("0" for _ in range(extra))) if extra else ""
    out = []
    for _ in range(rows):
        t = rng.weibullvariate(400.0, 1.3)
        c = rng.uniform(0.0, 900.0)
        out.append(f"{max(min(t, c), 0.01):.2f},{int(t <= c)}{pad}\n")
        if len(out) == 100000:
            f.write("".join(out)); out = []
    f.write("".join(out))
PY
}

measure() { # label rows columns file [extra fit options]
    local rc=0
    /usr/bin/time -v "$BIN" fit "$4" --time-unit days "${@:5}" --json "$WORK/fit.json" --force >"$WORK/stdout" 2>"$WORK/time" || rc=$?
    local kb secs mb
    kb=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$WORK/time")
    secs=$(awk -F': ' '/Elapsed \(wall clock\)/ {print $2}' "$WORK/time")
    mb=$(du -m "$4" | cut -f1)
    printf '| %s | %s | %s | %s | %s | %s | %s |\n' "$1" "$2" "$3" "$mb" "$((kb / 1024))" "$secs" "$rc"
}

echo "| input | rows | columns | file MB | peak RSS MB | wall time (m:ss) | exit |"
echo "|---|---|---|---|---|---|---|"
for n in $SIZES; do
    generate "$n" 0 "$WORK/long.csv"
    measure "time,event" "$n" 2 "$WORK/long.csv"
    rm -f "$WORK/long.csv"
done
# Reading cost alone: the exponential has a closed form, so the fit takes no time here.
generate "$WIDE_ROWS" 0 "$WORK/narrow.csv"
measure "time,event (exponential only)" "$WIDE_ROWS" 2 "$WORK/narrow.csv" --families exponential
generate "$WIDE_ROWS" 998 "$WORK/wide.csv"
measure "time,event + 998 unused (exponential only)" "$WIDE_ROWS" 1000 "$WORK/wide.csv" --families exponential
