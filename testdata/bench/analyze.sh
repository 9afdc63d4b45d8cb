#!/usr/bin/env bash
# analyze.sh: how much slower than plain decoding is `failframe analyze`?
#
# Renders (once, cached) a 1280x720 H.264 clip of 2100 frames of an invented
# Z-braced tower with 33 tracked points, then times
#   ffmpeg -i clip.mp4 -f null -      (decoding only: the floor)
#   failframe analyze clip.mp4 ...    (decode once, track, measure, report)
# and prints the ratio of wall times and failframe's peak memory (maximum
# resident set size from /usr/bin/time -v), and the ratio of CPU times (steadier
# than wall time on a shared machine). Targets: ratio <= 1.3, peak < 300 MB.
#
# Environment: BIN (default bin/failframe), BENCH_DIR (default
# /tmp/failframe-bench; the clip is kept there between runs).
set -euo pipefail

BIN=${BIN:-bin/failframe}
DIR=${BENCH_DIR:-/tmp/failframe-bench}
CLIP=$DIR/clip
FRAMES=2100

if [ ! -x "$BIN" ]; then
	echo "bench: $BIN not built (run make build)" >&2
	exit 1
fi
if ! command -v ffmpeg >/dev/null; then
	echo "bench: ffmpeg not installed (run make deps)" >&2
	exit 1
fi
if [ ! -x /usr/bin/time ]; then
	echo "bench: installing GNU time for the peak-memory figure" >&2
	SUDO=""
	[ "$(id -u)" = 0 ] || SUDO=sudo
	$SUDO apt-get install -y -qq time >/dev/null
fi

mkdir -p "$DIR"
stamp="$CLIP/.params"
params="seed=5 w=1280 h=720 frames=$FRAMES onset=1500 break=1900 collapse=1950 bracing=z"
if [ ! -f "$CLIP/tower.mp4" ] || [ "$(cat "$stamp" 2>/dev/null)" != "$params" ]; then
	echo "bench: rendering the $FRAMES-frame 1280x720 clip (once; kept in $CLIP)" >&2
	rm -rf "$CLIP"
	"$BIN" synth --out "$CLIP" --seed 5 --bracing z --width 1280 --height 720 --focal-px 1100 \
		--frames $FRAMES --onset-frame 1500 --break-frame 1900 --collapse-frame 1950 >/dev/null
	echo "$params" >"$stamp"
fi
points=$(awk '/^points:/ {p = 1; next} /^[a-z]/ {p = 0} p && /^    - id:/ {n++} END {print n + 0}' "$CLIP/marks.yaml")
codec=$(ffprobe -v error -select_streams v:0 -show_entries stream=codec_name,width,height,nb_frames -of csv=p=0 "$CLIP/tower.mp4")

# Warm the page cache so both runs read the file from memory.
cat "$CLIP/tower.mp4" >/dev/null

FTIMEV=$DIR/ffmpeg-time.txt
t0=$(date +%s.%N)
/usr/bin/time -v -o "$FTIMEV" ffmpeg -v error -nostdin -i "$CLIP/tower.mp4" -f null -
t1=$(date +%s.%N)

OUT=$DIR/report
TIMEV=$DIR/time.txt
t2=$(date +%s.%N)
/usr/bin/time -v -o "$TIMEV" "$BIN" analyze "$CLIP/tower.mp4" --marks "$CLIP/marks.yaml" \
	--load "$CLIP/load.csv" --mass-g 21.4 --out "$OUT" --force --quiet >/dev/null 2>"$DIR/analyze.err"
t3=$(date +%s.%N)

rss_kb=$(awk -F: '/Maximum resident set size/ {gsub(/ /, "", $2); print $2}' "$TIMEV")
cpu() { awk -F: '/User time|System time/ {s += $2} END {print s}' "$1"; }
acpu=$(cpu "$TIMEV")
fcpu=$(cpu "$FTIMEV")
awk -v t0="$t0" -v t1="$t1" -v t2="$t2" -v t3="$t3" -v rss="$rss_kb" -v acpu="$acpu" -v fcpu="$fcpu" \
	-v pts="$points" -v codec="$codec" 'BEGIN {
	d = t1 - t0; a = t3 - t2
	printf "clip: %s (codec,width,height,frames), %d tracked points\n", codec, pts
	printf "ffmpeg decode (-f null): %.2f s\n", d
	printf "failframe analyze:       %.2f s\n", a
	printf "ratio analyze/decode:    %.2f wall (target <= 1.3)\n", a / d
	printf "CPU time (user+sys):     ffmpeg %.2f s, analyze %.2f s, ratio %.2f\n", fcpu, acpu, acpu / fcpu
	printf "peak memory (max RSS):   %.0f MB (target < 300 MB)\n", rss / 1024
}'
