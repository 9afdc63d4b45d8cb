#!/usr/bin/env bash
# analyze.sh: how much slower than plain decoding is `failframe analyze`?
#
# Renders (once, cached) a 1280x720 H.264 clip of 2100 frames of an invented
# Z-braced tower with 33 tracked points, then times
#   ffmpeg -i clip.mp4 -f null -      (decoding only: the floor)
#   failframe probe clip.mp4 --count  (reading every frame through OpenCV,
#                                      as analyze does, and nothing else)
#   failframe analyze clip.mp4 ...    (decode once, track, measure, report)
# in rounds, and prints each round's ratio of wall times and of CPU times
# (user + system), their medians, how much of the analysis ratio is reading
# through OpenCV (which converts every frame to colour and copies it) and how
# much is failframe's own work, and failframe's peak memory
# (maximum resident set size: from GNU time when installed, else the
# process's VmHWM read from /proc while it runs). Targets: ratio <= 1.3,
# peak < 300 MB. The last line sums it up. A measurement, not a test: it
# exits 0 whether or not the targets are met, non-zero only when it cannot
# measure (no binary, no ffmpeg, analyze failing).
#
# Environment: BIN (default bin/failframe), BENCH_ROUNDS (default 3: rounds
# of both runs; the median round's ratios are printed), BENCH_DIR (default
# /tmp/failframe-bench; the clip is kept there between runs), BENCH_PROC_RSS
# (set: read the peak from /proc even when GNU time is installed).
set -euo pipefail

BIN=${BIN:-bin/failframe}
DIR=${BENCH_DIR:-/tmp/failframe-bench}
CLIP=$DIR/clip
FRAMES=2100
ROUNDS=${BENCH_ROUNDS:-3}

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
OUT=$DIR/report
# Rounds of ffmpeg then analyze, back to back: a shared machine's speed
# drifts by 10-20 % over a minute, and each round's ratio compares runs made
# under the same conditions; the median round is the figure.
: >"$DIR/rounds"
for round in $(seq 1 "$ROUNDS"); do
	measure ffmpeg ffmpeg -v error -nostdin -i "$CLIP/tower.mp4" -f null -
	measure read "$BIN" probe "$CLIP/tower.mp4" --count --quiet
	measure analyze "$BIN" analyze "$CLIP/tower.mp4" --marks "$CLIP/marks.yaml" \
		--load "$CLIP/load.csv" --mass-g 21.4 --out "$OUT" --force --quiet
	echo "$(cat "$DIR/ffmpeg.wall") $(cat "$DIR/ffmpeg.cpu") $(cat "$DIR/analyze.wall") $(cat "$DIR/analyze.cpu") $(cat "$DIR/analyze.rss") $(cat "$DIR/read.wall")" >>"$DIR/rounds"
done

awk -v pts="$points" -v codec="$codec" -v load="$load" -v cores="$(nproc)" '
{ d[NR] = $1; fc[NR] = $2; a[NR] = $3; ac[NR] = $4; rss[NR] = $5; r[NR] = $3 / $1; c[NR] = $4 / $2; rd[NR] = $6 / $1; own[NR] = ($3 - $6) / $1 }
function median(x, n,   i, j, t, y) {
	for (i = 1; i <= n; i++) y[i] = x[i]
	for (i = 1; i <= n; i++) for (j = i + 1; j <= n; j++) if (y[j] < y[i]) { t = y[i]; y[i] = y[j]; y[j] = t }
	return n % 2 ? y[(n + 1) / 2] : (y[n / 2] + y[n / 2 + 1]) / 2
}
END {
	n = NR
	printf "clip: %s (codec,width,height,frames), %d tracked points\n", codec, pts
	printf "machine: %d cores, load average %s before the runs\n", cores, load
	peak = 0
	for (i = 1; i <= n; i++) {
		printf "round %d: ffmpeg decode (-f null) %.2f s wall, %.2f s CPU; failframe analyze %.2f s wall, %.2f s CPU; wall ratio %.2fx, CPU ratio %.2fx; reading alone %.2fx of the ffmpeg wall time\n", i, d[i], fc[i], a[i], ac[i], r[i], c[i], rd[i]
		if (rss[i] > peak) peak = rss[i]
	}
	printf "CPU time ratio (user+sys), median of %d rounds: %.2f\n", n, median(c, n)
	printf "of the wall ratio, median of %d rounds: reading every frame through OpenCV (failframe probe --count) %.2fx; failframe'"'"'s own work on top of it +%.2fx\n", n, median(rd, n), median(own, n)
	printf "analyze/decode wall ratio, median of %d rounds: %.2f (target <= 1.3); peak memory: %.0f MB (target < 300 MB)\n", n, median(r, n), peak / 1024
}' "$DIR/rounds"
