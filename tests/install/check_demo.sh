#!/usr/bin/env bash
# The README's demo command end to end on a slice of the demo day: real mosquitto, the
# built nightjar, the paho player. The slice 10:00-10:45 learns for half an hour, then
# holds the planned stop of pump A at 10:30, which the flow's anomaly alarm raises at
# 10:30:15 (its first outlying sample at 10:30:00 plus the 15 s on-delay; the same raise
# `nightjar replay` of the slice reports). The table must show that raise, the broker
# must have acknowledged every sample, and nightjar must have stopped cleanly.
# 500x (2500 samples/s over 5 channels, about 6 s) leaves the trainer a wide margin on a
# loaded box: at 3000x it needed all of its ~15 000 samples/s, and when the CI box was busy
# the broker's queue overflowed and the slice lost minutes of data.
#   check_demo.sh SOURCE_DIR NIGHTJAR_BINARY WORKDIR
set -euo pipefail
source_dir="$1" binary="$2" work="$3"
mkdir -p "$work"
"$source_dir/scripts/demo" --binary "$binary" --speed 500 --from 10:00 --to 10:44:59 >"$work/out.txt" 2>&1 || {
  cat "$work/out.txt" >&2; echo "demo failed" >&2; exit 1; }
cat "$work/out.txt"
grep -q "^10:30:15  cw2.pump_a.flow  *RAISE anomaly" "$work/out.txt" || {
  echo "the 10:30:15 raise is not in the table" >&2; exit 1; }
# 45 min of 1 s rows x 5 channels (the tank level is sampled every row in this slice).
grep -q "^sent 13500 samples up to 10:44:59" "$work/out.txt" || { echo "not every sample was sent" >&2; exit 1; }
logs=$(sed -n 's/^stopped; logs in //p' "$work/out.txt")
grep -q "info stopped: [0-9]* samples" "$logs/nightjar.log" || {
  cat "$logs/nightjar.log" >&2; echo "nightjar did not stop cleanly" >&2; exit 1; }
echo "demo ok"
