package synth

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/tracking/marks"
)

// Output file names inside the folder Write fills.
const (
	ClipAVI   = "tower.avi"
	ClipMP4   = "tower.mp4"
	TruthFile = "truth.json"
	MarksFile = "marks.yaml"
	LoadFile  = "load.csv"
)

// FFmpegPath returns the ffmpeg program Write uses for tower.mp4, or "" when
// there is none on PATH.
func FFmpegPath() string {
	p, err := exec.LookPath("ffmpeg")
	if err != nil {
		return ""
	}
	return p
}

// Write renders the scenario into dir: tower.avi (Motion JPEG through
// OpenCV), tower.mp4 (H.264 through the ffmpeg program, unless SkipMP4 or
// there is no ffmpeg), truth.json, marks.yaml and load.csv. Frames stream:
// each is drawn, encoded and dropped. Every file is written under a temporary
// name and renamed when complete, so an interrupted run leaves no half-written
// file. progress, when not nil, is called after each frame.
func Write(s Scenario, dir string, progress func(done, total int)) (*Truth, error) {
	r, err := NewRenderer(s)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("synth: create %s: %w", dir, err)
	}
	var cleanup []string
	defer func() {
		for _, p := range cleanup {
			os.Remove(p)
		}
	}()
	tmpName := func(final string) (string, error) {
		f, err := os.CreateTemp(dir, "."+final+".tmp*"+filepath.Ext(final))
		if err != nil {
			return "", fmt.Errorf("synth: %w", err)
		}
		f.Close()
		cleanup = append(cleanup, f.Name())
		if err := os.Chmod(f.Name(), 0o644); err != nil {
			return "", fmt.Errorf("synth: %w", err)
		}
		return f.Name(), nil
	}

	aviTmp, err := tmpName(ClipAVI)
	if err != nil {
		return nil, err
	}
	vw, err := gocv.VideoWriterFile(aviTmp, "MJPG", s.ContainerFPS, s.Width, s.Height, true)
	if err != nil {
		return nil, fmt.Errorf("synth: open %s for writing: %w", aviTmp, err)
	}
	if !vw.IsOpened() {
		vw.Close()
		return nil, fmt.Errorf("synth: OpenCV cannot write Motion JPEG to %s", aviTmp)
	}
	var (
		ff     *exec.Cmd
		ffIn   io.WriteCloser
		ffErr  bytes.Buffer
		mp4Tmp string
	)
	if ffmpeg := FFmpegPath(); ffmpeg != "" && !s.SkipMP4 {
		if mp4Tmp, err = tmpName(ClipMP4); err != nil {
			vw.Close()
			return nil, err
		}
		ff = exec.Command(ffmpeg, "-hide_banner", "-loglevel", "error", "-y",
			"-f", "rawvideo", "-pix_fmt", "bgr24", "-s", fmt.Sprintf("%dx%d", s.Width, s.Height),
			"-r", strconv.FormatFloat(s.ContainerFPS, 'f', -1, 64), "-i", "-",
			"-c:v", "libx264", "-preset", "veryfast", "-pix_fmt", "yuv420p", "-crf", "12", mp4Tmp)
		ff.Stderr = &ffErr
		if ffIn, err = ff.StdinPipe(); err != nil {
			vw.Close()
			return nil, fmt.Errorf("synth: ffmpeg: %w", err)
		}
		if err := ff.Start(); err != nil {
			vw.Close()
			return nil, fmt.Errorf("synth: start ffmpeg: %w", err)
		}
	}
	stopFF := func() error {
		if ff == nil {
			return nil
		}
		ffIn.Close()
		err := ff.Wait()
		ff = nil
		if err != nil {
			return fmt.Errorf("synth: ffmpeg writing %s: %v: %s", ClipMP4, err, bytes.TrimSpace(ffErr.Bytes()))
		}
		return nil
	}
	frame := gocv.NewMat()
	defer frame.Close()
	n := r.NumFrames()
	for i := 0; i < n; i++ {
		if err := r.Frame(i, &frame); err != nil {
			vw.Close()
			stopFF()
			return nil, err
		}
		if err := vw.Write(frame); err != nil {
			vw.Close()
			stopFF()
			return nil, fmt.Errorf("synth: write frame %d to %s: %w", i, ClipAVI, err)
		}
		if ff != nil {
			if _, err := ffIn.Write(frame.ToBytes()); err != nil {
				vw.Close()
				e2 := stopFF()
				return nil, errors.Join(fmt.Errorf("synth: pipe frame %d to ffmpeg: %w", i, err), e2)
			}
		}
		if progress != nil {
			progress(i+1, n)
		}
	}
	if err := vw.Close(); err != nil {
		stopFF()
		return nil, fmt.Errorf("synth: close %s: %w", ClipAVI, err)
	}
	if err := stopFF(); err != nil {
		return nil, err
	}

	truth := r.Truth()
	data, err := json.MarshalIndent(truth, "", " ")
	if err != nil {
		return nil, fmt.Errorf("synth: encode truth: %w", err)
	}
	truthTmp, err := tmpName(TruthFile)
	if err != nil {
		return nil, err
	}
	if err := os.WriteFile(truthTmp, append(data, '\n'), 0o644); err != nil {
		return nil, fmt.Errorf("synth: write %s: %w", TruthFile, err)
	}
	loadTmp, err := tmpName(LoadFile)
	if err != nil {
		return nil, err
	}
	var lb bytes.Buffer
	if err := r.load.write(&lb); err != nil {
		return nil, fmt.Errorf("synth: write %s: %w", LoadFile, err)
	}
	if err := os.WriteFile(loadTmp, lb.Bytes(), 0o644); err != nil {
		return nil, fmt.Errorf("synth: write %s: %w", LoadFile, err)
	}
	renames := [][2]string{{aviTmp, ClipAVI}, {truthTmp, TruthFile}, {loadTmp, LoadFile}}
	if mp4Tmp != "" {
		renames = append(renames, [2]string{mp4Tmp, ClipMP4})
	}
	for _, rn := range renames {
		if err := os.Rename(rn[0], filepath.Join(dir, rn[1])); err != nil {
			return nil, fmt.Errorf("synth: %w", err)
		}
	}
	mp := filepath.Join(dir, MarksFile)
	if err := marks.Save(mp, r.Marks()); err != nil {
		return nil, fmt.Errorf("synth: %w", err)
	}
	if err := os.Chmod(mp, 0o644); err != nil {
		return nil, fmt.Errorf("synth: %w", err)
	}
	return truth, nil
}

// WriteLoadLog writes the scenario's load-cell log (load.csv) to w.
func (r *Renderer) WriteLoadLog(w io.Writer) error { return r.load.write(w) }
