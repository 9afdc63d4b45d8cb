package cli

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

func TestProbeArgsToOptions(t *testing.T) {
	tests := []struct {
		name    string
		args    []string
		want    probeOptions
		wantErr string
	}{
		{"clip only", []string{"c.mp4"}, probeOptions{clip: "c.mp4"}, ""},
		{"all flags", []string{"c.mp4", "--capture-fps", "960", "--image-fps", "30", "--count", "--json", "-q"},
			probeOptions{clip: "c.mp4", captureFPS: 960, imageFPS: 30, count: true, json: true, quiet: true}, ""},
		{"no clip", nil, probeOptions{}, "accepts 1 arg"},
		{"capture rate zero", []string{"c.mp4", "--capture-fps", "0"}, probeOptions{}, "--capture-fps: capture rate 0 fps is not usable"},
		{"capture rate negative", []string{"c.mp4", "--capture-fps", "-240"}, probeOptions{}, "capture rate -240 fps"},
		{"capture rate absurd", []string{"c.mp4", "--capture-fps", "2e6"}, probeOptions{}, "at most 1e+06"},
		{"image rate negative", []string{"c", "--image-fps", "-1"}, probeOptions{}, "--image-fps"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			checkArgs(t, newProbeCmdWith, tt.args, tt.wantErr, tt.want, func(o *probeOptions) { o.io = nil })
		})
	}
}

func TestProbeOutput(t *testing.T) {
	clip := capClip(t, 90)
	// Outside check: ffprobe's count of decoded frames and stored rate.
	n, err := strconv.Atoi(strings.TrimSpace(capRun(t, "ffprobe", "-v", "error", "-count_frames", "-select_streams", "v:0",
		"-show_entries", "stream=nb_read_frames", "-of", "csv=p=0", clip)))
	if err != nil || n != 90 {
		t.Fatalf("ffprobe counted %d frames", n)
	}
	io, out, errOut := testIO()
	if code := Run(io, []string{"probe", clip, "--capture-fps", "960"}); code != ExitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	want := strings.Join([]string{
		"clip            " + clip,
		"size            192x144",
		"codec           avc1",
		"container rate  30 fps",
		"frames          90 (stated by the container)",
		"stored length   3.000 s at 30 fps",
		"real length     0.09375 s at 960 fps capture (--capture-fps)", // 90 / 960
		"bad frames      not checked (--count decodes every frame)",
	}, "\n") + "\n"
	if out.String() != want {
		t.Errorf("output\n%s\nwant\n%s", out, want)
	}
	if errOut.Len() != 0 {
		t.Errorf("unexpected warnings: %s", errOut)
	}

	// JSON after a full decode, without a capture rate: warned, container rate used.
	io, out, errOut = testIO()
	if code := Run(io, []string{"probe", clip, "--count", "--json"}); code != ExitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var rep probeReport
	if err := json.Unmarshal(out.Bytes(), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Frames != n || rep.Decoded != n || !rep.Scanned || len(rep.BadFrames) != 0 || rep.CountSource != "counted" ||
		rep.ContainerFPS != 30 || rep.StoredDurationS == nil || *rep.StoredDurationS != 3 ||
		rep.CaptureFPSFrom != "container" || rep.RealDurationS != 3 {
		t.Errorf("report %+v", rep)
	}
	if !strings.Contains(errOut.String(), "warning: no capture rate given") {
		t.Errorf("no container-rate warning: %q", errOut)
	}
}

func TestProbeBadInputs(t *testing.T) {
	capNeedFFmpeg(t)
	dir := t.TempDir()
	notVideo := filepath.Join(dir, "log.mp4")
	os.WriteFile(notVideo, []byte("time_ms,load_g\n0,0\n"), 0o644)
	sound := filepath.Join(dir, "sound.mp4")
	capRun(t, "ffmpeg", "-v", "error", "-f", "lavfi", "-i", "sine=duration=0.3", sound)
	whole := capClip(t, 60)
	half := capCut(t, whole)
	// With the index at the front, the cut file opens and runs out part way.
	fast := filepath.Join(dir, "fast.mp4")
	capRun(t, "ffmpeg", "-v", "error", "-i", whole, "-c", "copy", "-movflags", "+faststart", fast)
	fastHalf := capCut(t, fast)
	// 2000 bytes overwritten a third of the way in.
	b, _ := os.ReadFile(whole)
	copy(b[len(b)/3:], strings.Repeat("\xff", 2000))
	overwritten := filepath.Join(dir, "overwritten.mp4")
	os.WriteFile(overwritten, b, 0o644)
	// Outside check: the frames ffmpeg cannot decode in it either.
	var lostMP4 []int
	mp4Sums := capFFmpegMD5(t, overwritten)
	for f := 0; f < 60; f++ {
		if _, ok := mp4Sums[f]; !ok {
			lostMP4 = append(lostMP4, f)
		}
	}
	if len(lostMP4) == 0 {
		t.Fatal("ffmpeg decodes every frame of the overwritten clip: the damage missed")
	}
	damaged := capDamagedAVI(t)
	// Outside check: the frame ffmpeg cannot decode either.
	sums := capFFmpegMD5(t, damaged)
	lost := -1
	for f := 0; f < 40; f++ {
		if _, ok := sums[f]; !ok {
			lost = f
		}
	}
	if len(sums) != 39 || lost < 0 {
		t.Fatalf("ffmpeg decoded %d of 40 frames of the damaged clip", len(sums))
	}
	// A folder of stills with frame 3 (shot_4.png) missing, and one with
	// a still of another size.
	stills := func(name string) string {
		d := filepath.Join(dir, name)
		os.Mkdir(d, 0o755)
		capRun(t, "ffmpeg", "-v", "error", "-f", "lavfi", "-i", "testsrc2=size=64x48:rate=10", "-frames:v", "8",
			"-start_number", "1", filepath.Join(d, "shot_%d.png"))
		return d
	}
	gap := stills("gap")
	os.Remove(filepath.Join(gap, "shot_4.png"))
	mixed := stills("mixed")
	capRun(t, "ffmpeg", "-v", "error", "-y", "-f", "lavfi", "-i", "testsrc2=size=80x48", "-frames:v", "1", filepath.Join(mixed, "shot_6.png"))
	tests := []struct {
		name string
		args []string
		code int
		want []string
	}{
		{"stills with a gap", []string{"probe", gap, "--image-fps", "1000"}, ExitBadInput,
			[]string{"numbering skips from shot_3.png to shot_5.png", "1 frame missing or undecodable (3)"}},
		{"stills of mixed sizes", []string{"probe", mixed}, ExitBadInput, []string{"shot_6.png is 80x48", "mixed frame sizes"}},
		{"missing file", []string{"probe", filepath.Join(dir, "none.mp4")}, ExitBadInput, []string{"none.mp4", "no such file"}},
		{"not a video", []string{"probe", notVideo}, ExitBadInput, []string{notVideo, "not a readable video"}},
		{"no video frames", []string{"probe", sound}, ExitBadInput, []string{sound}},
		{"mp4 cut in half", []string{"probe", half}, ExitBadInput, []string{half, "not a readable video"}},
		{"mp4 cut in half, index in front", []string{"probe", fastHalf, "--count"}, ExitBadInput,
			[]string{fastHalf, "the stream ends at frame", "the container lists 60 frames"}},
		{"mp4 with bytes overwritten", []string{"probe", overwritten, "--count"}, ExitBadInput,
			[]string{overwritten, strconv.Itoa(len(lostMP4)) + " " + plural(len(lostMP4), "frame", "frames") + " missing or undecodable (" + frameRanges(lostMP4, 10) + ")"}},
		{"frame overwritten", []string{"probe", damaged, "--count"}, ExitBadInput, []string{damaged, "1 frame missing or undecodable (" + strconv.Itoa(lost) + ")"}},
		{"capture rate 0", []string{"probe", damaged, "--capture-fps", "0"}, ExitUsage, []string{"capture rate 0 fps is not usable"}},
		{"capture rate negative", []string{"probe", damaged, "--capture-fps=-5"}, ExitUsage, []string{"capture rate -5 fps is not usable"}},
		{"capture rate absurd", []string{"probe", damaged, "--capture-fps", "5000000"}, ExitUsage, []string{"capture rate 5e+06 fps"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, errOut := testIO()
			if code := Run(io, tt.args); code != tt.code {
				t.Fatalf("exit %d, want %d; stderr: %s", code, tt.code, errOut)
			}
			for _, w := range tt.want {
				if !strings.Contains(errOut.String(), w) {
					t.Errorf("stderr %q lacks %q", errOut, w)
				}
			}
		})
	}
}
