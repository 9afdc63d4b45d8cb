package cli

import (
	"bufio"
	"context"
	"encoding/json"
	"image"
	"image/color"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"gocv.io/x/gocv"
)

func TestReviewArgsToOptions(t *testing.T) {
	tests := []struct {
		name string
		args []string
		want reviewOptions
		addr string
		code int
		err  string
	}{
		{name: "defaults", args: []string{"clip.avi"}, want: reviewOptions{Clip: "clip.avi"}, addr: "127.0.0.1:0"},
		{name: "all flags", args: []string{"clip.avi", "--marks", "m.yaml", "--report", "rep", "--capture-fps", "960", "--port", "8123", "--open"},
			want: reviewOptions{Clip: "clip.avi", Marks: "m.yaml", Report: "rep", CaptureFPS: 960, Port: 8123, Open: true}, addr: "127.0.0.1:8123"},
		{name: "listen host with port flag", args: []string{"c.avi", "--listen", "0.0.0.0", "--port", "9000"},
			want: reviewOptions{Clip: "c.avi", Listen: "0.0.0.0", Port: 9000}, addr: "0.0.0.0:9000"},
		{name: "listen host:port", args: []string{"c.avi", "--listen", "192.168.1.5:7000"},
			want: reviewOptions{Clip: "c.avi", Listen: "192.168.1.5:7000"}, addr: "192.168.1.5:7000"},
		{name: "no clip", args: nil, code: ExitUsage, err: "accepts 1 arg"},
		{name: "two clips", args: []string{"a.avi", "b.avi"}, code: ExitUsage, err: "accepts 1 arg"},
		{name: "port too big", args: []string{"c.avi", "--port", "70000"}, code: ExitUsage, err: "--port 70000"},
		{name: "negative rate", args: []string{"c.avi", "--capture-fps", "-5"}, code: ExitUsage, err: "--capture-fps"},
		{name: "rate over a million", args: []string{"c.avi", "--capture-fps", "2e6"}, code: ExitUsage, err: "--capture-fps"},
		{name: "infinite rate", args: []string{"c.avi", "--capture-fps", "inf"}, code: ExitUsage, err: "--capture-fps"},
		{name: "two ports", args: []string{"c.avi", "--listen", "0.0.0.0:80", "--port", "81"}, code: ExitUsage, err: "drop --port"},
		{name: "listen not an address", args: []string{"c.avi", "--listen", "my laptop"}, code: ExitUsage, err: "HOST or HOST:PORT"},
		{name: "bad rate value", args: []string{"c.avi", "--capture-fps", "fast"}, code: ExitUsage, err: "invalid argument"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, errOut := testIO()
			var got *reviewOptions
			root := NewRootCmd(io)
			// Replace the review command with one that records its options.
			for _, c := range root.Commands() {
				if c.Name() == "review" {
					root.RemoveCommand(c)
				}
			}
			root.AddCommand(newReviewCmdWith(io, func(_ context.Context, o *reviewOptions) error {
				got = o
				return nil
			}))
			root.SetArgs(append([]string{"review"}, tt.args...))
			_, err := root.ExecuteC()
			if code := exitCode(err); code != tt.code {
				t.Fatalf("exit %d (%v), want %d; stderr %s", code, err, tt.code, errOut)
			}
			if tt.code != ExitOK {
				if err == nil || !strings.Contains(err.Error(), tt.err) {
					t.Errorf("error %v, want one mentioning %q", err, tt.err)
				}
				return
			}
			got.IO, got.portSet = nil, false
			if *got != tt.want {
				t.Errorf("options %+v, want %+v", *got, tt.want)
			}
			if a := got.addr(); a != tt.addr {
				t.Errorf("addr %q, want %q", a, tt.addr)
			}
		})
	}
}

// writeTestClip writes a short MJPG clip for the command tests.
func writeTestClip(t *testing.T, dir string) string {
	t.Helper()
	path := filepath.Join(dir, "c.avi")
	vw, err := gocv.VideoWriterFile(path, "MJPG", 25, 64, 48, true)
	if err != nil {
		t.Fatal(err)
	}
	img := gocv.NewMatWithSize(48, 64, gocv.MatTypeCV8UC3)
	defer img.Close()
	for i := 0; i < 5; i++ {
		img.SetTo(gocv.NewScalar(float64(20*i), 80, 120, 0))
		gocv.Circle(&img, image.Pt(10+8*i, 24), 4, color.RGBA{255, 255, 255, 0}, -1)
		if err := vw.Write(img); err != nil {
			t.Fatal(err)
		}
	}
	vw.Close()
	return path
}

func TestReviewRunServesAndStops(t *testing.T) {
	dir := t.TempDir()
	clip := writeTestClip(t, dir)
	pr, pw := io.Pipe()
	errOut := &strings.Builder{}
	ios := &IOStreams{In: strings.NewReader(""), Out: pw, ErrOut: errOut}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := make(chan error, 1)
	go func() {
		done <- reviewRun(ctx, &reviewOptions{IO: ios, Clip: clip, CaptureFPS: 1000})
		pw.Close()
	}()
	url, err := bufio.NewReader(pr).ReadString('\n')
	if err != nil {
		t.Fatalf("no URL printed: %v", err)
	}
	url = strings.TrimSpace(url)
	if !strings.HasPrefix(url, "http://127.0.0.1:") || !strings.HasSuffix(url, "/") {
		t.Fatalf("printed %q, want a loopback URL", url)
	}
	resp, err := http.Get(url + "api/info")
	if err != nil {
		t.Fatal(err)
	}
	var info struct {
		Frames     int     `json:"frames"`
		CaptureFPS float64 `json:"capture_fps"`
		MarksFile  string  `json:"marks_file"`
	}
	json.NewDecoder(resp.Body).Decode(&info)
	resp.Body.Close()
	if info.Frames != 5 || info.CaptureFPS != 1000 || info.MarksFile != filepath.Join(dir, "c.marks.yaml") {
		t.Errorf("info %+v, want 5 frames at 1000 fps and marks c.marks.yaml beside the clip", info)
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("review ended with %v", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("review did not stop when cancelled")
	}
	if !strings.Contains(errOut.String(), "Ctrl-C") || !strings.Contains(errOut.String(), "1000 fps (flag)") {
		t.Errorf("status lines %q", errOut)
	}
}

func TestReviewBadInputExit3(t *testing.T) {
	dir := t.TempDir()
	clip := writeTestClip(t, dir)
	bad := filepath.Join(dir, "bad.yaml")
	writeReviewFile(t, bad, "points:\n  - id: A\n    px: [1, 1]\n  - id: A\n    px: [2, 2]\n")
	offFrame := filepath.Join(dir, "off.yaml")
	writeReviewFile(t, offFrame, "points:\n  - id: A\n    px: [100, 1]\n")
	tests := []struct {
		name string
		args []string
		err  string
	}{
		{"missing clip", []string{"review", filepath.Join(dir, "none.avi")}, "none.avi"},
		{"not a video", []string{"review", bad}, "bad.yaml"},
		{"duplicate point", []string{"review", clip, "--marks", bad}, "duplicate point id"},
		{"point off the frame", []string{"review", clip, "--marks", offFrame}, "outside the 64x48 frame"},
		{"missing report", []string{"review", clip, "--report", filepath.Join(dir, "nope")}, "nope"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ios, out, errOut := testIO()
			if code := Run(ios, tt.args); code != ExitBadInput {
				t.Fatalf("exit %d, want %d; stderr %s", code, ExitBadInput, errOut)
			}
			if !strings.Contains(errOut.String(), tt.err) {
				t.Errorf("stderr %q lacks %q", errOut, tt.err)
			}
			if out.Len() != 0 {
				t.Errorf("printed %q on failure", out)
			}
		})
	}
}

func writeReviewFile(t *testing.T, path, s string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
}
