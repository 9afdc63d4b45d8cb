package review

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	"github.com/failframe/failframe/tracking/tracks"
)

// readTracks reads points.csv of a report folder (columns frame, time_s,
// point, x_px, y_px, x_mm, y_mm, quality, lost; one row per frame and point).
func readTracks(path string) (*tracks.Tracks, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read tracks %s: %w", path, err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	head, err := r.Read()
	if err != nil {
		return nil, fmt.Errorf("read tracks %s: header: %w", path, err)
	}
	col := map[string]int{}
	for i, h := range head {
		col[strings.TrimSpace(h)] = i
	}
	for _, need := range []string{"frame", "point", "x_px", "y_px"} {
		if _, ok := col[need]; !ok {
			return nil, fmt.Errorf("read tracks %s: header lacks column %s", path, need)
		}
	}
	t := &tracks.Tracks{}
	ids := map[string]int{}
	for {
		rec, err := r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("read tracks %s: %w", path, err)
		}
		line, _ := r.FieldPos(0)
		fr, err := strconv.Atoi(rec[col["frame"]])
		if err != nil {
			return nil, fmt.Errorf("read tracks %s line %d: frame %q: %w", path, line, rec[col["frame"]], err)
		}
		id := rec[col["point"]]
		j, ok := ids[id]
		if !ok {
			if len(t.Frames) > 1 {
				return nil, fmt.Errorf("read tracks %s line %d: point %s first appears after frame %d", path, line, id, t.Frames[0])
			}
			j = len(t.IDs)
			ids[id] = j
			t.IDs = append(t.IDs, id)
			for i := range t.Samples {
				t.Samples[i] = append(t.Samples[i], tracks.Sample{X: math.NaN(), Y: math.NaN(), Lost: true})
			}
		}
		if n := len(t.Frames); n == 0 || t.Frames[n-1] != fr {
			if n > 0 && fr < t.Frames[n-1] {
				return nil, fmt.Errorf("read tracks %s line %d: frame %d after frame %d", path, line, fr, t.Frames[n-1])
			}
			t.Frames = append(t.Frames, fr)
			row := make([]tracks.Sample, len(t.IDs))
			for k := range row {
				row[k] = tracks.Sample{X: math.NaN(), Y: math.NaN(), Lost: true}
			}
			t.Samples = append(t.Samples, row)
		}
		s := tracks.Sample{X: math.NaN(), Y: math.NaN()}
		num := func(name string) float64 {
			i, ok := col[name]
			if !ok || i >= len(rec) || rec[i] == "" {
				return math.NaN()
			}
			v, err := strconv.ParseFloat(rec[i], 64)
			if err != nil {
				return math.NaN()
			}
			return v
		}
		s.X, s.Y, s.Quality = num("x_px"), num("y_px"), num("quality")
		if i, ok := col["lost"]; ok && i < len(rec) {
			s.Lost = rec[i] == "1" || strings.EqualFold(rec[i], "true")
		}
		if math.IsNaN(s.X) || math.IsNaN(s.Y) {
			s.Lost = true
		}
		t.Samples[len(t.Samples)-1][j] = s
	}
	return t, nil
}

// readMemberBow reads the bow of each member per frame from a report's
// members.csv (columns frame, member and bow_pct; other columns ignored).
func readMemberBow(path string) (*bowTable, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read members %s: %w", path, err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.ReuseRecord = true
	head, err := r.Read()
	if err != nil {
		return nil, fmt.Errorf("read members %s: header: %w", path, err)
	}
	col := map[string]int{}
	for i, h := range head {
		col[strings.TrimSpace(h)] = i
	}
	fc, okF := col["frame"]
	mc, okM := col["member"]
	bc, okB := col["bow_pct"]
	if !okF || !okM || !okB {
		return nil, fmt.Errorf("read members %s: header lacks frame, member or bow_pct", path)
	}
	type sample struct {
		frame int
		frac  float64
	}
	byID := map[string][]sample{}
	first, last := math.MaxInt, math.MinInt
	for {
		rec, err := r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("read members %s: %w", path, err)
		}
		line, _ := r.FieldPos(0)
		fr, err := strconv.Atoi(strings.TrimSpace(rec[fc]))
		if err != nil || fr < 0 {
			return nil, fmt.Errorf("read members %s line %d: frame %q is not a frame number", path, line, rec[fc])
		}
		frac := math.NaN()
		if v := strings.TrimSpace(rec[bc]); v != "" {
			p, err := strconv.ParseFloat(v, 64)
			if err != nil {
				return nil, fmt.Errorf("read members %s line %d: bow_pct %q is not a number", path, line, v)
			}
			frac = p / 100
		}
		id := strings.Clone(rec[mc])
		byID[id] = append(byID[id], sample{fr, frac})
		first, last = min(first, fr), max(last, fr)
	}
	bt := &bowTable{first: first, byID: map[string][]float64{}}
	if len(byID) == 0 {
		return bt, nil
	}
	if last-first > 10_000_000 {
		return nil, fmt.Errorf("read members %s: frames %d to %d is not a clip", path, first, last)
	}
	for id, ss := range byID {
		v := make([]float64, last-first+1)
		for i := range v {
			v[i] = math.NaN()
		}
		for _, s := range ss {
			v[s.frame-first] = s.frac
		}
		bt.byID[id] = v
	}
	return bt, nil
}
