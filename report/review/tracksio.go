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

// readTracks reads points.csv of a report folder.
func readTracks(path string) (*tracks.Tracks, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read tracks %s: %w", path, err)
	}
	defer f.Close()
	t, err := tracks.ReadCSV(f)
	if err != nil {
		return nil, fmt.Errorf("read tracks %s: %w", path, err)
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
