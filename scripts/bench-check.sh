#!/usr/bin/env bash
# Measures `dwiaudit check` on a classic DTI series of about 2,000 images
# against the budget of issue 13: under 10 s wall time and under 300 MiB
# peak RSS (on the 2-core build machine).
#
#   scripts/bench-check.sh [FOLDER]
#
# Without FOLDER it writes our own phantom: 64 slices x (b0 + 30
# directions + trace) = 2,048 classic MR images, 128x128. With FOLDER it
# checks that folder instead (e.g. a real series). It prints the image
# count, wall time and peak RSS (from /usr/bin/time -v, "Maximum resident
# set size") and exits 1 above either budget, 2 on bad arguments.
# MAX_SECONDS and MAX_MIB override the budget.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"
max_s="${MAX_SECONDS:-10}"
max_mib="${MAX_MIB:-300}"

if [ ! -x /usr/bin/time ]; then
  echo "/usr/bin/time not found: install the Debian package time" >&2
  exit 2
fi
if [ $# -gt 1 ] || { [ $# -eq 1 ] && [ ! -d "$1" ]; }; then
  echo "usage: scripts/bench-check.sh [FOLDER]" >&2
  exit 2
fi
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
(cd "$repo" && go build -o "$work/dwiaudit" ./cmd/dwiaudit)

if [ $# -eq 1 ]; then
  in="$(cd "$1" && pwd)"
else
  in="$work/series"
  "$work/dwiaudit" phantom --out "$in" --case clean --slices 64 --directions 30 --matrix 128 >/dev/null
fi
n="$(find "$in" -type f | wc -l)"

# check exits 1 when it has findings; only a crash or bad input (>= 2)
# spoils the measurement.
rc=0
/usr/bin/time -v -o "$work/time" "$work/dwiaudit" check --format json "$in" > "$work/out.json" 2> "$work/err" || rc=$?
if [ "$rc" -ge 2 ]; then
  echo "bench-check: check exited $rc:" >&2
  tail -5 "$work/err" >&2
  exit 1
fi
wall="$(awk -F': ' '/Elapsed \(wall clock\)/ {print $2}' "$work/time")"
secs="$(echo "$wall" | awk -F: '{s=0; for (i=1;i<=NF;i++) s=s*60+$i; print s}')"
kib="$(awk -F': ' '/Maximum resident set size/ {print $2}' "$work/time")"
cpu="$(awk -F': ' '/Percent of CPU/ {print $2}' "$work/time")"
mib="$(awk -v k="$kib" 'BEGIN {printf "%.1f", k/1024}')"
series="$(python3 -c 'import json,sys; r=json.load(open(sys.argv[1])); print(len(r.get("series") or []))' "$work/out.json" 2>/dev/null || echo "?")"
printf 'images %s  series %s  wall %.2f s  cpu %s  peak RSS %s MiB  (budget %s s, %s MiB)\n' "$n" "$series" "$secs" "$cpu" "$mib" "$max_s" "$max_mib"
over=0
awk -v a="$secs" -v b="$max_s" 'BEGIN {exit !(a > b)}' && { echo "bench-check: over the time budget" >&2; over=1; }
awk -v a="$mib" -v b="$max_mib" 'BEGIN {exit !(a > b)}' && { echo "bench-check: over the memory budget" >&2; over=1; }
exit "$over"
