#!/bin/sh
# wholefile.sh: time the whole-file pass of `caploop summary` against `wc -l` on a
# 10-million-line capture, and report the peak memory of the summary.
#
# Usage: testdata/bench/wholefile.sh [LINES] [WORKDIR]
#   LINES    data lines to generate (default 10000000, about 320 MB)
#   WORKDIR  where the file goes (default a temporary folder, removed at the end)
#
# It builds caploop, makes the file with the virtual board as fast as it can run
# (`caploop sim --fast`), reads it once so that both timings start from a warm page
# cache, then runs `wc -l`, `caploop summary --quiet --no-advice` and `caploop summary
# --quiet` (with the advice, a cost that does not grow with the file) under
# /usr/bin/time -v and prints the wall times, their ratios to `wc -l` (target: at most
# 10) and the summaries' peak resident memory (target: under 64 MiB).
set -eu
lines=${1:-10000000}
root=$(cd "$(dirname "$0")/../.." && pwd)
work=${2:-}
if [ -z "$work" ]; then
	work=$(mktemp -d)
	trap 'rm -rf "$work"' EXIT
fi
if [ ! -x /usr/bin/time ]; then
	echo "wholefile.sh: /usr/bin/time is needed (GNU time, package 'time')" >&2
	exit 2
fi
(cd "$root" && go build -o "$work/caploop" ./cmd/caploop)
file="$work/wholefile.log"
if [ ! -s "$file" ]; then
	"$work/caploop" sim --fast --samples "$lines" --out "$file"
fi
ls -l "$file"
cat "$file" >/dev/null

# seconds prints the wall time of a /usr/bin/time -v report in seconds.
seconds() {
	awk -F': ' '/Elapsed \(wall clock\)/ {
		n = split($2, p, ":"); s = 0
		for (i = 1; i <= n; i++) s = s * 60 + p[i]
		print s }' "$1"
}
rss() { awk -F': ' '/Maximum resident set size/ { print $2 }' "$1"; }

/usr/bin/time -v wc -l "$file" 2>"$work/wc.time"
/usr/bin/time -v "$work/caploop" summary --quiet --no-advice "$file" >"$work/summary.txt" 2>"$work/summary.time" || {
	echo "wholefile.sh: caploop summary failed:" >&2
	cat "$work/summary.time" >&2
	exit 1
}
/usr/bin/time -v "$work/caploop" summary --quiet "$file" >"$work/advice.txt" 2>"$work/advice.time" || {
	echo "wholefile.sh: caploop summary (with advice) failed:" >&2
	cat "$work/advice.time" >&2
	exit 1
}
head -3 "$work/summary.txt"
wc_s=$(seconds "$work/wc.time")
sum_s=$(seconds "$work/summary.time")
sum_kb=$(rss "$work/summary.time")
adv_s=$(seconds "$work/advice.time")
adv_kb=$(rss "$work/advice.time")
awk -v w="$wc_s" -v s="$sum_s" -v kb="$sum_kb" -v a="$adv_s" -v akb="$adv_kb" 'BEGIN {
	printf "wc -l:           %.2f s\n", w
	printf "with advice:     %.2f s, peak RSS %.1f MiB", a, akb / 1024
	if (w > 0) printf ", ratio %.1f", a / w
	printf "\n"
	printf "caploop summary: %.2f s, peak RSS %.1f MiB (target < 64 MiB)\n", s, kb / 1024
	if (w > 0) printf "ratio:           %.1f (target <= 10)\n", s / w
}'
