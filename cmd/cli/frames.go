package cli

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"
	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
)

func init() { commands = append(commands, newFramesCmd) }

// Limits of the frames command.
const (
	maxExportFrames = 10000
	maxSheetTiles   = 100
	sheetWidth      = 2400 // largest contact-sheet width in pixels
)

// framesOptions are the options of `failframe frames`.
type framesOptions struct {
	io         *IOStreams
	clip       string
	at         string // real time, "1.234s" or "1.234"
	frame      int    // first frame, when atSet is false
	atSet      bool
	count      int
	step       int
	captureFPS float64
	imageFPS   float64
	out        string
	sheet      bool
	quiet      bool
}

func newFramesCmd(io *IOStreams) *cobra.Command {
	return newFramesCmdWith(io, framesRun)
}

func newFramesCmdWith(io *IOStreams, runF func(*framesOptions) error) *cobra.Command {
	opts := &framesOptions{io: io}
	cmd := &cobra.Command{
		Use:   "frames CLIP (--at SECONDS | --frame N) --out DIR [flags]",
		Short: "Export frames as PNG images named by frame number and real time",
		Long: `Export frames of a clip as PNG images, starting at a real time (--at) or a
frame number (--frame), --count frames every --step frames. Each file is
named by frame number and real time, e.g. frame-000123_t0.128125s.png for
frame 123 of a clip filmed at 960 fps. With --sheet one contact sheet
(sheet_frame-000123-000141.png) is written instead, each tile stamped with
its frame number and real time.

Real time is frame / capture rate: give --capture-fps for a slow-motion
clip, else the container's rate is used with a warning. Files are written
whole or not at all. A frame that cannot be decoded is reported and skipped
(the sheet shows it as a grey tile), and the exit status is then 3.
` + exitHelp,
		Example: `  failframe frames tower.mp4 --capture-fps 960 --at 1.234s --count 8 --step 4 --out evidence
  failframe frames tower.mp4 --frame 1180 --count 16 --sheet --out evidence`,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.clip = args[0]
			fl := cmd.Flags()
			opts.atSet = fl.Changed("at")
			switch {
			case opts.atSet && fl.Changed("frame"):
				return &FlagError{Err: errors.New("give --at or --frame, not both")}
			case !opts.atSet && !fl.Changed("frame"):
				return &FlagError{Err: errors.New("give where to start: --at SECONDS (real time) or --frame N")}
			case !opts.atSet && opts.frame < 0:
				return &FlagError{Err: fmt.Errorf("--frame %d: frame numbers start at 0", opts.frame)}
			case opts.count < 1 || opts.count > maxExportFrames:
				return &FlagError{Err: fmt.Errorf("--count %d: must be 1 to %d", opts.count, maxExportFrames)}
			case opts.sheet && opts.count > maxSheetTiles:
				return &FlagError{Err: fmt.Errorf("--count %d: a sheet holds at most %d tiles", opts.count, maxSheetTiles)}
			case opts.step < 1:
				return &FlagError{Err: fmt.Errorf("--step %d: must be 1 or more", opts.step)}
			case opts.out == "":
				return &FlagError{Err: errors.New("--out is required: the folder to write the images into")}
			}
			if opts.atSet {
				if _, err := parseSeconds(opts.at); err != nil {
					return &FlagError{Err: err}
				}
			}
			if err := checkRateFlags(cmd, opts.captureFPS, opts.imageFPS); err != nil {
				return err
			}
			return runF(opts)
		},
	}
	f := cmd.Flags()
	f.StringVar(&opts.at, "at", "", "real time of the first frame, seconds (\"1.234s\" or \"1.234\")")
	f.IntVar(&opts.frame, "frame", 0, "number of the first frame (from 0)")
	f.IntVar(&opts.count, "count", 1, "number of frames to export")
	f.IntVar(&opts.step, "step", 1, "frames between exported frames")
	f.Float64Var(&opts.captureFPS, "capture-fps", 0, "true capture rate of the camera, frames per second (default: the container's rate, with a warning)")
	f.Float64Var(&opts.imageFPS, "image-fps", 0, "rate of a folder of stills, frames per second")
	f.StringVar(&opts.out, "out", "", "folder to write the images into (required; made if missing)")
	f.BoolVar(&opts.sheet, "sheet", false, "write one contact sheet instead of one image per frame")
	f.BoolVarP(&opts.quiet, "quiet", "q", false, "no progress bar")
	return cmd
}

// parseSeconds reads "1.234s" or "1.234" as seconds.
func parseSeconds(s string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSuffix(strings.TrimSpace(s), "s"), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
		return 0, fmt.Errorf("--at %q: want real seconds from the start of the clip, like 1.234s", s)
	}
	return v, nil
}

// frameFileName names an exported frame by number and real time.
func frameFileName(frame int, tb capture.Timebase) string {
	return fmt.Sprintf("frame-%06d_t%ss.png", frame, strconv.FormatFloat(tb.Time(frame), 'f', 6, 64))
}

func framesRun(opts *framesOptions) error {
	count, countDone := newProgress(opts.io, opts.quiet, 0, "counting frames of "+opts.clip)
	src, err := capture.Open(opts.clip, capture.Options{ImageFPS: opts.imageFPS, Progress: count})
	countDone()
	if err != nil {
		return err
	}
	defer src.Close()
	info := src.Info()
	for _, w := range info.Warnings {
		fmt.Fprintf(opts.io.ErrOut, "warning: %s\n", w)
	}
	tb, warn, err := chooseClipRate(opts.captureFPS, opts.imageFPS, info)
	if err != nil {
		return &FlagError{Err: fmt.Errorf("clip %s: %w; give --capture-fps", opts.clip, err)}
	}
	if warn != "" {
		fmt.Fprintf(opts.io.ErrOut, "warning: %s\n", warn)
	}
	start := opts.frame
	if opts.atSet {
		sec, _ := parseSeconds(opts.at)
		start = tb.Frame(sec)
	}
	if start >= info.FrameCount {
		return &InputError{Err: fmt.Errorf("clip %s: frame %d (%.6f s) is past the end: the clip has frames 0 to %d (0 to %.6f s at %s fps)",
			opts.clip, start, tb.Time(start), info.FrameCount-1, tb.Time(info.FrameCount-1), fmtNum(tb.CaptureFPS))}
	}
	var frames []int
	for i := 0; i < opts.count; i++ {
		f := start + i*opts.step
		if f >= info.FrameCount {
			fmt.Fprintf(opts.io.ErrOut, "warning: the clip ends at frame %d: exporting %d of %d frames\n", info.FrameCount-1, len(frames), opts.count)
			break
		}
		frames = append(frames, f)
	}
	if err := os.MkdirAll(opts.out, 0o755); err != nil {
		return fmt.Errorf("make output folder: %w", err)
	}

	update, finish := newProgress(opts.io, opts.quiet, len(frames), "exporting frames")
	defer finish()
	var sheet *contactSheet
	if opts.sheet {
		sheet = newContactSheet(info.Width, info.Height, len(frames))
		defer sheet.Close()
	}
	img := gocv.NewMat()
	defer img.Close()
	var bad []string
	for i, f := range frames {
		update(i, len(frames))
		err := src.Seek(f)
		if err == nil {
			_, err = src.Read(&img)
		}
		var fe *capture.FrameError
		switch {
		case errors.As(err, &fe):
			fmt.Fprintf(opts.io.ErrOut, "warning: %v: skipped\n", err)
			bad = append(bad, strconv.Itoa(f))
			if sheet != nil {
				sheet.Missing(i, f, tb)
			}
			continue
		case err != nil:
			return fmt.Errorf("read frame %d of %s: %w", f, opts.clip, err)
		}
		if sheet != nil {
			sheet.Add(i, img, f, tb)
			continue
		}
		p := filepath.Join(opts.out, frameFileName(f, tb))
		if err := writePNG(p, img); err != nil {
			return err
		}
		fmt.Fprintln(opts.io.Out, p)
	}
	update(len(frames), len(frames))
	if sheet != nil {
		p := filepath.Join(opts.out, fmt.Sprintf("sheet_frame-%06d-%06d.png", frames[0], frames[len(frames)-1]))
		if err := writePNG(p, sheet.img); err != nil {
			return err
		}
		fmt.Fprintln(opts.io.Out, p)
	}
	if len(bad) > 0 {
		return &InputError{Err: fmt.Errorf("clip %s: %d of %d frames could not be decoded (frames %s)", opts.clip, len(bad), len(frames), strings.Join(bad, ", "))}
	}
	return nil
}

// writePNG writes img to path as PNG through a temporary file in the same
// folder, so that path is either the whole image or untouched.
func writePNG(path string, img gocv.Mat) error {
	buf, err := gocv.IMEncode(gocv.PNGFileExt, img)
	if err != nil {
		return fmt.Errorf("encode %s: %w", path, err)
	}
	defer buf.Close()
	return writeFileAtomic(path, buf.GetBytes())
}

// writeFileAtomic writes data to path through a temporary file and a rename.
func writeFileAtomic(path string, data []byte) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	_, werr := tmp.Write(data)
	if werr == nil {
		werr = tmp.Chmod(0o644)
	}
	if werr == nil {
		werr = tmp.Sync()
	}
	cerr := tmp.Close()
	if werr == nil {
		werr = cerr
	}
	if werr == nil {
		werr = os.Rename(tmp.Name(), path)
	}
	if werr != nil {
		os.Remove(tmp.Name())
		return fmt.Errorf("write %s: %w", path, werr)
	}
	return nil
}

// contactSheet lays frames out as tiles on one image, each stamped with its
// frame number and real time.
type contactSheet struct {
	img        gocv.Mat
	cols       int
	tileW      int
	tileH      int
	label      int // label band height
	fontScale  float64
	fontWeight int
}

func newContactSheet(w, h, n int) *contactSheet {
	cols := int(math.Ceil(math.Sqrt(float64(n))))
	rows := (n + cols - 1) / cols
	tileW := w
	if cols*tileW > sheetWidth {
		tileW = sheetWidth / cols
	}
	tileH := int(math.Round(float64(h) * float64(tileW) / float64(w)))
	if tileH < 1 {
		tileH = 1
	}
	// Labels fit the tile width: the widest label at font scale 1, scaled
	// down, at most 0.6.
	sz := gocv.GetTextSize("frame 000000  t=00.000000 s  MISSING", gocv.FontHersheySimplex, 1, 1)
	scale := math.Min(0.6, float64(tileW-8)/float64(sz.X))
	label := int(math.Ceil(float64(sz.Y)*scale)) + 10
	s := &contactSheet{cols: cols, tileW: tileW, tileH: tileH, label: label, fontScale: scale, fontWeight: 1}
	s.img = gocv.NewMatWithSizeFromScalar(gocv.NewScalar(32, 32, 32, 0), rows*(tileH+label), cols*tileW, gocv.MatTypeCV8UC3)
	return s
}

// tile returns the rectangle of tile i (image part) and its label band.
func (s *contactSheet) tile(i int) (image.Rectangle, image.Rectangle) {
	x := (i % s.cols) * s.tileW
	y := (i / s.cols) * (s.tileH + s.label)
	return image.Rect(x, y+s.label, x+s.tileW, y+s.label+s.tileH), image.Rect(x, y, x+s.tileW, y+s.label)
}

// stamp writes text, white on black, in a label band (drawing is clipped
// to the band).
func (s *contactSheet) stamp(band image.Rectangle, text string) {
	region := s.img.Region(band)
	defer region.Close()
	region.SetTo(gocv.NewScalar(0, 0, 0, 0))
	gocv.PutText(&region, text, image.Pt(4, band.Dy()-5),
		gocv.FontHersheySimplex, s.fontScale, color.RGBA{255, 255, 255, 0}, s.fontWeight)
}

// Add draws frame f as tile i.
func (s *contactSheet) Add(i int, img gocv.Mat, f int, tb capture.Timebase) {
	r, band := s.tile(i)
	region := s.img.Region(r)
	defer region.Close()
	gocv.Resize(img, &region, image.Pt(s.tileW, s.tileH), 0, 0, gocv.InterpolationArea)
	s.stamp(band, fmt.Sprintf("frame %d  t=%.6f s", f, tb.Time(f)))
}

// Missing draws tile i as a grey tile for a frame that could not be read.
func (s *contactSheet) Missing(i int, f int, tb capture.Timebase) {
	r, band := s.tile(i)
	region := s.img.Region(r)
	defer region.Close()
	region.SetTo(gocv.NewScalar(96, 96, 96, 0))
	s.stamp(band, fmt.Sprintf("frame %d  t=%.6f s  MISSING", f, tb.Time(f)))
}

// Close frees the sheet image.
func (s *contactSheet) Close() { s.img.Close() }
