// Package evidence draws the report's evidence: frames of the clip with the
// tracked points marked, the members drawn and coloured by how much they bow,
// the first member to go highlighted, and the frame number, real time and
// load stamped on; a contact sheet across the failure window; and a short
// annotated clip of the failure window (Motion-JPEG AVI).
//
// The frames come from those kept during the pass over the clip (a Keeper,
// at the reduced evidence size) where it holds them; any other frame is read
// again from the clip, seeking over the rest, and shrunk to the same size.
package evidence

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// BowWarnFrac and BowBadFrac set the member colours: green below
// BowWarnFrac of the length, yellow at it, red at BowBadFrac and above.
const (
	BowWarnFrac = 0.005
	BowBadFrac  = 0.02
)

// Overlay is what is drawn over a frame.
type Overlay struct {
	// Marks gives the points and members.
	Marks *marks.File
	// Tracks gives the point positions per frame; frames outside it show no points.
	Tracks *tracks.Tracks
	// BowFrac maps a member id to its bow as a fraction of its length, one
	// value per Tracks row (NaN = unknown).
	BowFrac map[string][]float64
	// FirstMember is highlighted; "" for none.
	FirstMember string
	// Width is the clip's frame width, in which the tracks are given; a
	// frame drawn at another width has the points scaled to it. 0 = the
	// frame is drawn at the clip's size.
	Width int
}

// Shot is one annotated frame to save as a PNG.
type Shot struct {
	// Frame is the frame number.
	Frame int
	// File is the PNG's name inside the evidence folder.
	File string
	// Caption says what the frame shows.
	Caption string
}

// Request says what to render.
type Request struct {
	// Shots are the single frames.
	Shots []Shot
	// Sheet are the frames of the contact sheet (none = no sheet).
	Sheet []int
	// ClipFrom and ClipTo bound the annotated clip (inclusive); ClipTo < ClipFrom = no clip.
	ClipFrom, ClipTo int
	// ClipFPS is the clip's playback rate; default 30.
	ClipFPS float64
	// Stamp returns the text stamped on a frame (frame number, time, load).
	Stamp func(frame int) string
	// Have holds frames already decoded (such as the reference frame), used
	// instead of reading them again; the caller keeps ownership.
	Have map[int]gocv.Mat
	// Kept holds frames kept from the pass over the clip, used before
	// reading the clip again; nil = none.
	Kept *Keeper
	// Size is the size the frames are drawn at; zero = the clip's size
	// (or the keeper's, when Kept is set).
	Size image.Point
}

// Written is one file written.
type Written struct {
	// File is the path relative to the evidence folder's parent ("evidence/...").
	File string
	// Caption says what it shows; "" for the clip.
	Caption string
}

// SheetFile and ClipFile are the contact sheet and the clip's names.
const (
	SheetFile = "sheet.png"
	ClipFile  = "failure.avi"
)

// maxClipWidth bounds the clip's frame width.
const maxClipWidth = 640

// seekGap is how far ahead a wanted frame must be before skipping to it
// (decoding without converting) beats reading every frame to it.
const seekGap = 24

// grabGap is the largest forward gap crossed by decoding through the frames
// in between, in steps of grabStep (each a short forward Seek, which decodes
// without converting). A longer jump seeks, which decodes again from the
// keyframe before the target: fewer frames only when a keyframe lies in the
// gap. Contact-sheet frames of a long failure window sit ~50 frames apart;
// seeking to each would decode up to a keyframe interval again every time.
const (
	grabGap  = 150
	grabStep = 32
)

// Render reads the frames req needs from src and writes the shots, the
// contact sheet and the clip into dir (created if needed).
func Render(src capture.Source, ov *Overlay, req Request, dir string) ([]Written, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("evidence: %w", err)
	}
	info := src.Info()
	want := map[int]bool{}
	for _, s := range req.Shots {
		want[s.Frame] = true
	}
	for _, f := range req.Sheet {
		want[f] = true
	}
	wantClip := req.ClipTo >= req.ClipFrom
	if wantClip {
		for f := req.ClipFrom; f <= req.ClipTo; f++ {
			want[f] = true
		}
	}
	var frames []int
	for f := range want {
		if f >= 0 && (info.FrameCount <= 0 || f < info.FrameCount) {
			frames = append(frames, f)
		}
	}
	sort.Ints(frames)

	shotsAt := map[int][]Shot{}
	for _, s := range req.Shots {
		shotsAt[s.Frame] = append(shotsAt[s.Frame], s)
	}
	sheetAt := map[int][]int{}
	for i, f := range req.Sheet {
		sheetAt[f] = append(sheetAt[f], i)
	}
	thumbs := make([]*gocv.Mat, len(req.Sheet))
	defer func() {
		for _, t := range thumbs {
			if t != nil {
				t.Close()
			}
		}
	}()

	// The clip is compressed and written on its own goroutine while the
	// next frames are drawn.
	var clip *clipSink
	defer func() {
		if clip != nil {
			clip.close()
		}
	}()

	size := req.Size
	if size == (image.Point{}) {
		size = image.Pt(info.Width, info.Height)
		if req.Kept != nil {
			size = req.Kept.Size()
		}
	}
	img := gocv.NewMat()
	defer img.Close()
	work := gocv.NewMat()
	defer work.Close()
	small := gocv.NewMat()
	defer small.Close()

	var out []Written
	pos := -1 // the frame the next Read returns, -1 = unknown
	for _, f := range frames {
		var frame gocv.Mat
		if have, ok := req.Have[f]; ok && !have.Empty() {
			frame = have
		} else if req.Kept != nil && req.Kept.Frame(f, &img) {
			frame = img
		} else {
			if pos < 0 || f < pos || f-pos > seekGap {
				if pos >= 0 && f > pos && f-pos <= grabGap {
					for ; f-pos > grabStep; pos += grabStep {
						if err := src.Seek(pos + grabStep); err != nil {
							return out, fmt.Errorf("evidence frame %d: %w", f, err)
						}
					}
				}
				if err := src.Seek(f); err != nil {
					return out, fmt.Errorf("evidence frame %d: %w", f, err)
				}
				pos = f
			}
			for pos <= f {
				n, err := src.Read(&img)
				if err != nil {
					if errors.Is(err, io.EOF) {
						return out, fmt.Errorf("evidence frame %d: the clip ended at frame %d", f, pos-1)
					}
					return out, fmt.Errorf("evidence frame %d: %w", f, err)
				}
				pos = n + 1
			}
			frame = img
		}
		if frame.Cols() != size.X || frame.Rows() != size.Y {
			gocv.Resize(frame, &work, size, 0, 0, gocv.InterpolationArea)
		} else {
			frame.CopyTo(&work)
		}
		stamp := ""
		if req.Stamp != nil {
			stamp = req.Stamp(f)
		}
		ov.Draw(&work, f, stamp)

		for _, s := range shotsAt[f] {
			p := filepath.Join(dir, s.File)
			if !gocv.IMWrite(p, work) {
				return out, fmt.Errorf("evidence: write %s", p)
			}
			out = append(out, Written{File: filepath.ToSlash(filepath.Join(filepath.Base(dir), s.File)), Caption: s.Caption})
		}
		for _, i := range sheetAt[f] {
			t := gocv.NewMat()
			w := 320
			h := int(math.Round(float64(work.Rows()) * float64(w) / float64(work.Cols())))
			gocv.Resize(work, &t, image.Pt(w, h), 0, 0, gocv.InterpolationArea)
			drawStamp(&t, stamp) // again, readable at thumbnail size
			if thumbs[i] != nil {
				thumbs[i].Close()
			}
			thumbs[i] = &t
		}
		if wantClip && f >= req.ClipFrom && f <= req.ClipTo {
			if clip == nil {
				size := image.Pt(work.Cols(), work.Rows())
				if size.X > maxClipWidth {
					size = image.Pt(maxClipWidth, int(math.Round(float64(work.Rows())*maxClipWidth/float64(work.Cols())))&^1)
				}
				fps := req.ClipFPS
				if fps <= 0 {
					fps = 30
				}
				var err error
				if clip, err = newClipSink(filepath.Join(dir, ClipFile), size, fps); err != nil {
					return out, fmt.Errorf("evidence: open %s for writing: %w", ClipFile, err)
				}
			}
			frame := work.Clone()
			if clip.size.X != work.Cols() {
				gocv.Resize(work, &frame, clip.size, 0, 0, gocv.InterpolationArea)
			}
			if err := clip.add(frame); err != nil {
				return out, fmt.Errorf("evidence: write %s: %w", ClipFile, err)
			}
		}
	}
	if clip != nil {
		err := clip.close()
		clip = nil
		if err != nil {
			return out, fmt.Errorf("evidence: write %s: %w", ClipFile, err)
		}
		out = append(out, Written{File: filepath.ToSlash(filepath.Join(filepath.Base(dir), ClipFile))})
	}
	if len(req.Sheet) > 0 {
		if err := writeSheet(filepath.Join(dir, SheetFile), thumbs); err != nil {
			return out, err
		}
		out = append(out, Written{File: filepath.ToSlash(filepath.Join(filepath.Base(dir), SheetFile)),
			Caption: fmt.Sprintf("Contact sheet: %d frames across the failure window, in order left to right, top to bottom", len(req.Sheet))})
	}
	return out, nil
}

// clipQuality is the JPEG quality of the failure clip's frames.
const clipQuality = 90

// clipSink compresses and writes the clip's frames on its own goroutine.
type clipSink struct {
	size   image.Point
	frames chan gocv.Mat
	done   chan error
	failed chan struct{}
	closed bool
}

func newClipSink(path string, size image.Point, fps float64) (*clipSink, error) {
	w, err := newAVIWriter(path, size.X, size.Y, fps, clipQuality)
	if err != nil {
		return nil, err
	}
	c := &clipSink{size: size, frames: make(chan gocv.Mat, 4), done: make(chan error, 1), failed: make(chan struct{})}
	go func() {
		var werr error
		for m := range c.frames {
			if werr == nil {
				if werr = w.Write(m); werr != nil {
					close(c.failed)
				}
			}
			m.Close()
		}
		if err := w.Close(); werr == nil {
			werr = err
		}
		c.done <- werr
	}()
	return c, nil
}

// add hands a frame (owned by the sink from then on) to the writer; it
// fails once the writer has failed.
func (c *clipSink) add(m gocv.Mat) error {
	select {
	case <-c.failed:
		m.Close()
		return c.close()
	case c.frames <- m:
		return nil
	}
}

// close waits for the frames to be written and the file closed.
func (c *clipSink) close() error {
	if c.closed {
		return nil
	}
	c.closed = true
	close(c.frames)
	return <-c.done
}

// writeSheet tiles the thumbnails four to a row.
func writeSheet(path string, thumbs []*gocv.Mat) error {
	var tw, th int
	n := 0
	for _, t := range thumbs {
		if t == nil || t.Empty() {
			continue
		}
		n++
		tw, th = max(tw, t.Cols()), max(th, t.Rows())
	}
	if n == 0 {
		return fmt.Errorf("evidence: no frames for the contact sheet")
	}
	cols := 4
	if n < cols {
		cols = n
	}
	rows := (n + cols - 1) / cols
	pad := 4
	sheet := gocv.NewMatWithSizeFromScalar(gocv.NewScalar(255, 255, 255, 0), rows*(th+pad)+pad, cols*(tw+pad)+pad, gocv.MatTypeCV8UC3)
	defer sheet.Close()
	k := 0
	for _, t := range thumbs {
		if t == nil || t.Empty() {
			continue
		}
		r, c := k/cols, k%cols
		roi := sheet.Region(image.Rect(pad+c*(tw+pad), pad+r*(th+pad), pad+c*(tw+pad)+t.Cols(), pad+r*(th+pad)+t.Rows()))
		t.CopyTo(&roi)
		roi.Close()
		k++
	}
	if !gocv.IMWrite(path, sheet) {
		return fmt.Errorf("evidence: write %s", path)
	}
	return nil
}

// BowColour is the colour of a member bowing by frac of its length: green,
// through yellow at BowWarnFrac, to red at BowBadFrac; grey when unknown.
func BowColour(frac float64) color.RGBA {
	a := math.Abs(frac)
	switch {
	case math.IsNaN(a):
		return color.RGBA{R: 150, G: 150, B: 150}
	case a < BowWarnFrac:
		f := a / BowWarnFrac
		return color.RGBA{R: uint8(230 * f), G: 200, B: 40}
	case a < BowBadFrac:
		f := (a - BowWarnFrac) / (BowBadFrac - BowWarnFrac)
		return color.RGBA{R: 230, G: uint8(200 * (1 - f)), B: 40}
	}
	return color.RGBA{R: 230, G: 0, B: 40}
}

// Draw marks the frame: members (coloured by bow, the first member
// highlighted), points, and the stamp in a bar along the top.
func (o *Overlay) Draw(img *gocv.Mat, frame int, stamp string) {
	w := img.Cols()
	scale := math.Max(0.5, float64(w)/1280)
	thick := int(math.Max(1, math.Round(2*scale)))
	k := 1.0 // clip pixels to frame pixels
	if o.Width > 0 && w > 0 {
		k = float64(w) / float64(o.Width)
	}
	at := func(x, y float64) image.Point {
		// Pixel centres: clip pixel x covers [x-0.5, x+0.5).
		return image.Pt(int(math.Round((x+0.5)*k-0.5)), int(math.Round((y+0.5)*k-0.5)))
	}
	row := -1
	if o.Tracks != nil {
		row = o.Tracks.Row(frame)
	}
	pos := func(id string) (image.Point, bool) {
		if row < 0 {
			return image.Point{}, false
		}
		s, ok := o.Tracks.At(row, id)
		if !ok || s.Lost || math.IsNaN(s.X) || math.IsNaN(s.Y) {
			return image.Point{}, false
		}
		return at(s.X, s.Y), true
	}
	if o.Marks != nil && row >= 0 {
		// Members: the first member last, so it is on top.
		order := make([]marks.Member, 0, len(o.Marks.Members))
		var first *marks.Member
		for i, m := range o.Marks.Members {
			if m.ID == o.FirstMember {
				first = &o.Marks.Members[i]
				continue
			}
			order = append(order, m)
		}
		if first != nil {
			order = append(order, *first)
		}
		for _, m := range order {
			frac := math.NaN()
			if b := o.BowFrac[m.ID]; row < len(b) {
				frac = b[row]
			}
			col := BowColour(frac)
			var pts []image.Point
			for _, id := range m.Points {
				if p, ok := pos(id); ok {
					pts = append(pts, p)
				}
			}
			if len(pts) < 2 {
				continue
			}
			t := thick
			if m.ID == o.FirstMember {
				t = thick * 3
				for i := 1; i < len(pts); i++ {
					gocv.Line(img, pts[i-1], pts[i], color.RGBA{R: 255, G: 255, B: 255}, t+2*thick)
				}
			}
			for i := 1; i < len(pts); i++ {
				gocv.Line(img, pts[i-1], pts[i], col, t)
			}
			if m.ID == o.FirstMember {
				mid := pts[len(pts)/2]
				gocv.PutText(img, m.ID+" (first)", image.Pt(mid.X+int(8*scale), mid.Y-int(8*scale)), gocv.FontHersheySimplex, 0.6*scale, color.RGBA{R: 255, G: 255, B: 255}, thick+2)
				gocv.PutText(img, m.ID+" (first)", image.Pt(mid.X+int(8*scale), mid.Y-int(8*scale)), gocv.FontHersheySimplex, 0.6*scale, color.RGBA{R: 200, G: 0, B: 40}, thick)
			}
		}
		for _, p := range o.Marks.Points {
			if q, ok := pos(p.ID); ok {
				gocv.Circle(img, q, int(math.Max(3, 4*scale)), color.RGBA{R: 0, G: 170, B: 255}, thick)
			} else if s, ok := o.Tracks.At(row, p.ID); ok && s.Lost {
				// A lost point: a small cross at its marked place.
				c := at(p.PX[0], p.PX[1])
				d := int(4 * scale)
				gocv.Line(img, c.Add(image.Pt(-d, -d)), c.Add(image.Pt(d, d)), color.RGBA{R: 255, G: 60}, thick)
				gocv.Line(img, c.Add(image.Pt(-d, d)), c.Add(image.Pt(d, -d)), color.RGBA{R: 255, G: 60}, thick)
			}
		}
	}
	drawStamp(img, stamp)
}

// drawStamp writes the stamp in white on a black bar along the top, with the
// text shrunk as needed to fit the width.
func drawStamp(img *gocv.Mat, stamp string) {
	if stamp == "" {
		return
	}
	w := img.Cols()
	fs := math.Max(0.35, 0.6*float64(w)/1280)
	thick := int(math.Max(1, math.Round(fs*2.5)))
	sz := gocv.GetTextSize(stamp, gocv.FontHersheySimplex, fs, thick)
	if avail := w - 8; sz.X > avail && sz.X > 0 {
		fs *= float64(avail) / float64(sz.X)
		sz = gocv.GetTextSize(stamp, gocv.FontHersheySimplex, fs, thick)
	}
	pad := max(3, sz.Y/2)
	gocv.Rectangle(img, image.Rect(0, 0, w, sz.Y+2*pad), color.RGBA{}, -1)
	gocv.PutText(img, stamp, image.Pt(4, sz.Y+pad), gocv.FontHersheySimplex, fs, color.RGBA{R: 255, G: 255, B: 255}, thick)
}
