package tracks

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
)

// CSVHeader is the header row of points.csv.
var CSVHeader = []string{"frame", "time_s", "point", "x_px", "y_px", "x_mm", "y_mm", "quality", "lost"}

// CSVError is a problem on one line of a points.csv file.
type CSVError struct {
	// Line is the 1-based line number.
	Line int
	// Err is the problem.
	Err error
}

func (e *CSVError) Error() string { return fmt.Sprintf("points.csv line %d: %v", e.Line, e.Err) }

// Unwrap returns the underlying problem.
func (e *CSVError) Unwrap() error { return e.Err }

// WriteCSV writes t as points.csv: one row per frame and point with the
// frame number, real time (frame / fps), point id, position in pixels,
// displacement from the reference position in millimetres (y positive down)
// and the quality and lost flag. time_s is empty when fps is 0; x_mm and
// y_mm are empty when mmPerPx is 0 or t.Ref is nil; positions are empty for
// a lost sample.
func WriteCSV(w io.Writer, t *Tracks, fps float64, mmPerPx float64) error {
	if fps < 0 || math.IsNaN(fps) || math.IsInf(fps, 0) {
		return fmt.Errorf("write points.csv: frame rate %g is not usable", fps)
	}
	if mmPerPx < 0 || math.IsNaN(mmPerPx) || math.IsInf(mmPerPx, 0) {
		return fmt.Errorf("write points.csv: scale %g mm/px is not usable", mmPerPx)
	}
	if t.Ref != nil && len(t.Ref) != len(t.IDs) {
		return fmt.Errorf("write points.csv: %d reference positions for %d points", len(t.Ref), len(t.IDs))
	}
	if len(t.Samples) != len(t.Frames) {
		return fmt.Errorf("write points.csv: %d sample rows for %d frames", len(t.Samples), len(t.Frames))
	}
	cw := csv.NewWriter(w)
	if err := cw.Write(CSVHeader); err != nil {
		return fmt.Errorf("write points.csv: %w", err)
	}
	rec := make([]string, len(CSVHeader))
	num := func(v float64, prec int) string { return strconv.FormatFloat(v, 'f', prec, 64) }
	for i, f := range t.Frames {
		row := t.Samples[i]
		if len(row) != len(t.IDs) {
			return fmt.Errorf("write points.csv: frame %d has %d samples for %d points", f, len(row), len(t.IDs))
		}
		for j, s := range row {
			rec[0] = strconv.Itoa(f)
			rec[1] = ""
			if fps > 0 {
				rec[1] = num(float64(f)/fps, 6)
			}
			rec[2] = t.IDs[j]
			rec[3], rec[4], rec[5], rec[6] = "", "", "", ""
			lost := s.Lost || math.IsNaN(s.X) || math.IsNaN(s.Y)
			if !lost {
				rec[3], rec[4] = num(s.X, 4), num(s.Y, 4)
				if mmPerPx > 0 && t.Ref != nil {
					rec[5] = num((s.X-t.Ref[j][0])*mmPerPx, 4)
					rec[6] = num((s.Y-t.Ref[j][1])*mmPerPx, 4)
				}
			}
			rec[7] = num(s.Quality, 4)
			rec[8] = "0"
			if lost {
				rec[8] = "1"
			}
			if err := cw.Write(rec); err != nil {
				return fmt.Errorf("write points.csv: %w", err)
			}
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("write points.csv: %w", err)
	}
	return nil
}

// ReadCSV reads points.csv as written by WriteCSV. Rows must come grouped by
// frame in ascending order, each frame listing the same points in the same
// order. Ref is recovered when x_mm and y_mm are present and some point has
// moved (it is the position minus the displacement over the scale found from
// the rows); otherwise it is nil.
func ReadCSV(r io.Reader) (*Tracks, error) {
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = -1
	cr.ReuseRecord = true
	head, err := cr.Read()
	if err != nil {
		if errors.Is(err, io.EOF) {
			return nil, &CSVError{Line: 1, Err: errors.New("empty file, want a header row")}
		}
		return nil, &CSVError{Line: 1, Err: err}
	}
	col := map[string]int{}
	for i, h := range head {
		col[h] = i
	}
	for _, h := range CSVHeader {
		if _, ok := col[h]; !ok {
			return nil, &CSVError{Line: 1, Err: fmt.Errorf("missing column %q (want %v)", h, CSVHeader)}
		}
	}
	t := &Tracks{}
	ids := map[string]bool{}
	var (
		cur      []Sample
		curFrame = math.MinInt
		first    = true
		// For recovering Ref: per point, one displaced sample's px and mm.
		mmSeen  bool
		scale   float64
		pxAt    [][2]float64
		mmAt    [][2]float64
		haveMM  []bool
		column  int
		line    int
		closeup = func() error {
			if cur == nil {
				return nil
			}
			if len(cur) != len(t.IDs) {
				return fmt.Errorf("frame %d lists %d points, the first frame lists %d", curFrame, len(cur), len(t.IDs))
			}
			t.Frames = append(t.Frames, curFrame)
			t.Samples = append(t.Samples, cur)
			cur = nil
			return nil
		}
	)
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		line, _ = cr.FieldPos(0)
		if err != nil {
			return nil, &CSVError{Line: line, Err: err}
		}
		if len(rec) != len(head) {
			return nil, &CSVError{Line: line, Err: fmt.Errorf("%d fields, the header has %d", len(rec), len(head))}
		}
		field := func(name string) string { return rec[col[name]] }
		frame, err := strconv.Atoi(field("frame"))
		if err != nil || frame < 0 {
			return nil, &CSVError{Line: line, Err: fmt.Errorf("frame %q is not a frame number", field("frame"))}
		}
		if frame != curFrame {
			if frame < curFrame {
				return nil, &CSVError{Line: line, Err: fmt.Errorf("frame %d after frame %d: rows must be in ascending frame order", frame, curFrame)}
			}
			if curFrame != math.MinInt {
				if err := closeup(); err != nil {
					return nil, &CSVError{Line: line - 1, Err: err}
				}
				first = false
			}
			curFrame = frame
			cur = make([]Sample, 0, len(t.IDs))
			column = 0
		}
		id := field("point")
		if id == "" {
			return nil, &CSVError{Line: line, Err: errors.New("empty point id")}
		}
		if first {
			if ids[id] {
				return nil, &CSVError{Line: line, Err: fmt.Errorf("point %q twice in frame %d", id, frame)}
			}
			ids[id] = true
			t.IDs = append(t.IDs, id)
			pxAt = append(pxAt, [2]float64{})
			mmAt = append(mmAt, [2]float64{})
			haveMM = append(haveMM, false)
		} else if column >= len(t.IDs) || t.IDs[column] != id {
			return nil, &CSVError{Line: line, Err: fmt.Errorf("point %q out of order in frame %d (want the first frame's order %v)", id, frame, t.IDs)}
		}
		var s Sample
		lostStr := field("lost")
		switch lostStr {
		case "0", "false":
		case "1", "true":
			s.Lost = true
		default:
			return nil, &CSVError{Line: line, Err: fmt.Errorf("lost %q is not 0 or 1", lostStr)}
		}
		if s.Quality, err = strconv.ParseFloat(field("quality"), 64); err != nil || s.Quality < 0 || s.Quality > 1 {
			return nil, &CSVError{Line: line, Err: fmt.Errorf("quality %q is not a number from 0 to 1", field("quality"))}
		}
		if s.Lost {
			s.X, s.Y = math.NaN(), math.NaN()
		} else {
			if s.X, err = parseFinite(field("x_px")); err != nil {
				return nil, &CSVError{Line: line, Err: fmt.Errorf("x_px: %w", err)}
			}
			if s.Y, err = parseFinite(field("y_px")); err != nil {
				return nil, &CSVError{Line: line, Err: fmt.Errorf("y_px: %w", err)}
			}
			if xs, ys := field("x_mm"), field("y_mm"); xs != "" || ys != "" {
				xm, err := parseFinite(xs)
				if err != nil {
					return nil, &CSVError{Line: line, Err: fmt.Errorf("x_mm: %w", err)}
				}
				ym, err := parseFinite(ys)
				if err != nil {
					return nil, &CSVError{Line: line, Err: fmt.Errorf("y_mm: %w", err)}
				}
				mmSeen = true
				if !haveMM[column] {
					pxAt[column], mmAt[column], haveMM[column] = [2]float64{s.X, s.Y}, [2]float64{xm, ym}, true
				}
				// The scale is mm over px of displacement; take it from the
				// largest displacement seen for accuracy.
				if scale == 0 {
					if d := math.Hypot(s.X-pxAt[column][0], s.Y-pxAt[column][1]); d > 1 {
						scale = math.Hypot(xm-mmAt[column][0], ym-mmAt[column][1]) / d
					}
				}
			}
		}
		cur = append(cur, s)
		column++
	}
	if curFrame == math.MinInt {
		return nil, &CSVError{Line: 1, Err: errors.New("no rows after the header")}
	}
	if err := closeup(); err != nil {
		return nil, &CSVError{Line: line, Err: err}
	}
	if mmSeen && scale > 0 {
		t.Ref = make([][2]float64, len(t.IDs))
		for j := range t.Ref {
			if !haveMM[j] {
				t.Ref = nil
				break
			}
			t.Ref[j] = [2]float64{pxAt[j][0] - mmAt[j][0]/scale, pxAt[j][1] - mmAt[j][1]/scale}
		}
	}
	return t, nil
}

func parseFinite(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%q is not a number", s)
	}
	return v, nil
}
