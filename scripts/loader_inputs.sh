#!/usr/bin/env bash
# Peak memory and wall time of loading data (issue 19, item 2): `tunnelcast fit --families
# exponential` (closed form, so the time is the reading) on two generated files:
#   wide: 100,000 rows x 1,000 columns (time, event and 998 unused columns)
#   long: 1,000,000 rows x 3 columns (time, event, arm)
# Files are generated in a temporary folder from a seeded invented scenario (Weibull event times,
# shape 1.3, scale 400 days, uniform censoring to 900 days, times rounded to 0.01 day; arms "A"
# and "B" alternating) and deleted afterwards; nothing large is committed.
# Needs /usr/bin/time (GNU time) and python3.
#   scripts/loader_inputs.sh                 # builds, then measures both files REPEAT times
#   BINS="before=/tmp/old-tunnelcast after=target/release/tunnelcast" scripts/loader_inputs.sh
#                                            # builds named by label, run alternately
# Prints the load (uptime), then one Markdown table row per run.
set -euo pipefail
cd "$(dirname "$0")/.."
REPEAT=${REPEAT:-3}
if [ -z "${BINS:-}" ]; then
    cargo build --release --quiet -j 1
    BINS="this=$PWD/target/release/tunnelcast"
fi
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT

generate() { # rows unused_columns arm(0/1) file
    python3 - "$1" "$2" "$3" "$4" <<'PY'
import random, sys
rows, extra, arm, path = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
rng = random.Random(2026)
header = "time,event" + (",arm" if arm else "") + "".join(f",x{i}" for i in range(extra))
pad = ",0" * extra
with open(path, "w", buffering=1 << 20) as f:
    f.write(header + "\n")
    out = []
    for i in range(rows):
        t = rng.weibullvariate(400.0, 1.3)
        c = rng.uniform(0.0, 900.0)
        a = ("," + "AB"[i % 2]) if arm else ""
        out.append(f"{max(min(t, c), 0.01):.2f},{int(t <= c)}{a}{pad}\n")
        if len(out) == 100000:
            f.write("".join(out)); out = []
    f.write("".join(out))
PY
}

measure() { # label rows columns file [extra fit options]
    local rc=0
    /usr/bin/time -v "$BIN" fit "$4" --time-unit days --families exponential "${@:5}" \
        --json "$WORK/fit.json" --force >"$WORK/stdout" 2>"$WORK/time" || rc=$?
    local kb secs mb
    kb=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$WORK/time")
    secs=$(awk -F': ' '/Elapsed \(wall clock\)/ {print $2}' "$WORK/time")
    mb=$(du -m "$4" | cut -f1)
    printf '| %s | %s | %s | %s | %s | %s | %s |\n' "$1" "$2" "$3" "$mb" "$((kb / 1024))" "$secs" "$rc"
}

generate 100000 998 0 "$WORK/wide.csv"
generate 1000000 0 1 "$WORK/long.csv"
echo "load before: $(uptime)"
echo "| build: input | rows | columns | file MB | peak RSS MB | wall time (m:ss) | exit |"
echo "|---|---|---|---|---|---|---|"
for _ in $(seq "$REPEAT"); do
    for named in $BINS; do
        BIN=${named#*=}
        measure "${named%%=*}: time,event + 998 unused" 100000 1000 "$WORK/wide.csv"
        measure "${named%%=*}: time,event,arm" 1000000 3 "$WORK/long.csv" --arm-col arm
    done
done
echo "load after: $(uptime)"
