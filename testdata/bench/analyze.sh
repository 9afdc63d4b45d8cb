#!/usr/bin/env bash
# analyze.sh: how much slower than plain decoding is `failframe analyze`?
#
# Renders (once, cached) a 1280x720 H.264 clip of 2100 frames of an invented
# Z-braced tower with 33 tracked points, then times
#   ffmpeg -i clip.mp4 -f null -      (decoding only: the floor)
#   failframe analyze clip.mp4 ...    (decode once, track, measure, report)
# and prints the ratio of wall times, the ratio of CPU times (user + system;
# steadier than wall time on a shared machine) and failframe's peak memory
# (maximum resident set size: from GNU time when installed, else the
# process's VmHWM read from /proc while it runs). Targets: ratio <= 1.3,
# peak < 300 MB. The last line sums it up. A measurement, not a test: it
# exits 0 whether or not the targets are met, non-zero only when it cannot
# measure (no binary, no ffmpeg, analyze failing).
#
# Environment: BIN (default bin/failframe), BENCH_DIR (default
# /tmp/failframe-bench; the clip is kept there between runs), BENCH_PROC_RSS
# (set: read the peak from /proc even when GNU time is installed).
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
GNUTIME=/usr/bin/time
if [ -n "${BENCH_PROC_RSS:-}" ]; then
	GNUTIME="" # read the peak from /proc even when GNU time is there
elif [ ! -x $GNUTIME ]; then
	echo "bench: installing GNU time (Debian package time) for the peak-memory figure" >&2
	SUDO=""
	if [ "$(id -u)" != 0 ]; then
		SUDO="sudo -n"
	fi
	if ! $SUDO apt-get install -y -qq time >/dev/null 2>&1 || [ ! -x $GNUTIME ]; then
		echo "bench: GNU time not available; peak memory read from /proc (VmHWM) instead" >&2
		GNUTIME=""
	fi
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

# measure NAME CMD...: runs CMD, leaving wall seconds in $DIR/NAME.wall,
# user+system CPU seconds in $DIR/NAME.cpu and peak resident KB in
# $DIR/NAME.rss. Standard error goes to $DIR/NAME.err.
measure() {
	local name=$1
	shift
	local t0 t1 rc=0
	t0=$(date +%s.%N)
	if [ -n "$GNUTIME" ]; then
		$GNUTIME -v -o "$DIR/$name.time" "$@" >/dev/null 2>"$DIR/$name.err" || rc=$?
		t1=$(date +%s.%N)
		awk -F: '/Maximum resident set size/ {gsub(/ /, "", $2); print $2}' "$DIR/$name.time" >"$DIR/$name.rss"
		awk -F: '/User time|System time/ {s += $2} END {print s}' "$DIR/$name.time" >"$DIR/$name.cpu"
	else
		# Poll VmHWM (the kernel's own peak) while the process runs; CPU
		# times from bash's times for finished children.
		local pid hwm=0 v
		times >"$DIR/$name.times" # in this shell: a subshell has no children
		"$@" >/dev/null 2>"$DIR/$name.err" &
		pid=$!
		while kill -0 "$pid" 2>/dev/null; do
			v=$(awk '/^VmHWM:/ {print $2}' "/proc/$pid/status" 2>/dev/null || true)
			if [ -n "$v" ] && [ "$v" -gt "$hwm" ]; then
				hwm=$v
			fi
			sleep 0.1
		done
		wait "$pid" || rc=$?
		t1=$(date +%s.%N)
		times >>"$DIR/$name.times"
		echo "$hwm" >"$DIR/$name.rss"
		# times prints the shell's, then its children's user and system
		# times (e.g. 1m2.500s) before and after: the children's difference.
		awk 'function sec(s,  m) { m = s; sub(/m.*/, "", m); sub(/^[0-9]+m/, "", s); sub(/s$/, "", s); return m * 60 + s }
			NR == 2 { c0 = sec($1) + sec($2) } NR == 4 { c1 = sec($1) + sec($2) } END { print c1 - c0 }' \
			"$DIR/$name.times" >"$DIR/$name.cpu"
	fi
	echo "$t1 - $t0" | awk '{print $1 - $3}' >"$DIR/$name.wall"
	if [ "$rc" != 0 ]; then
		echo "bench: $name failed (exit $rc):" >&2
		tail -5 "$DIR/$name.err" >&2
		exit 1
	fi
}

load=$(cut -d' ' -f1-3 /proc/loadavg)
measure ffmpeg ffmpeg -v error -nostdin -i "$CLIP/tower.mp4" -f null -
OUT=$DIR/report
measure analyze "$BIN" analyze "$CLIP/tower.mp4" --marks "$CLIP/marks.yaml" \
	--load "$CLIP/load.csv" --mass-g 21.4 --out "$OUT" --force --quiet

awk -v d="$(cat "$DIR/ffmpeg.wall")" -v a="$(cat "$DIR/analyze.wall")" -v rss="$(cat "$DIR/analyze.rss")" \
	-v acpu="$(cat "$DIR/analyze.cpu")" -v fcpu="$(cat "$DIR/ffmpeg.cpu")" \
	-v pts="$points" -v codec="$codec" -v load="$load" -v cores="$(nproc)" 'BEGIN {
	printf "clip: %s (codec,width,height,frames), %d tracked points\n", codec, pts
	printf "machine: %d cores, load average %s before the runs\n", cores, load
	printf "ffmpeg decode (-f null): %.2f s wall, %.2f s CPU\n", d, fcpu
	printf "failframe analyze:       %.2f s wall, %.2f s CPU\n", a, acpu
	printf "CPU time ratio (user+sys): %.2f\n", acpu / fcpu
	printf "analyze/decode wall ratio: %.2f (target <= 1.3); peak memory: %.0f MB (target < 300 MB)\n", a / d, rss / 1024
}'
