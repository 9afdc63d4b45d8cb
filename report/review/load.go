package review

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"

	"github.com/failframe/failframe/report"
)

// maxLoadPoints bounds the load samples sent to the page; longer logs are
// thinned keeping each bucket's smallest and largest load, so peaks survive.
const maxLoadPoints = 8000

// loadSeries is the aligned load in video time, as sent to the page.
type loadSeries struct {
	// TimeS is video time in seconds, ascending.
	TimeS []float64 `json:"time_s"`
	// LoadG is the load in grams.
	LoadG []float64 `json:"load_g"`
	// Columns names the CSV columns used.
	Columns string `json:"columns"`
}

// readLoad reads the aligned load log of a report folder (load.csv). The time
// column is the first of video_time_s, time_s, t_s or any column with "time"
// in its name; a log-clock column (its name has "log") is shifted by the
// report's alignment offset. The load column is load_g or the first column
// with "load" in its name.
func readLoad(path string, res *report.Result) (*loadSeries, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read load %s: %w", path, err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.Comment = '#'
	r.FieldsPerRecord = -1
	r.TrimLeadingSpace = true
	head, err := r.Read()
	if err != nil {
		return nil, fmt.Errorf("read load %s: header: %w", path, err)
	}
	for i := range head {
		head[i] = strings.ToLower(strings.TrimSpace(head[i]))
	}
	tc := pickColumn(head, []string{"video_time_s", "time_s", "t_s"}, "time")
	lc := pickColumn(head, []string{"load_g"}, "load")
	if tc < 0 || lc < 0 {
		return nil, fmt.Errorf("read load %s: header %q lacks a time and a load column", path, strings.Join(head, ","))
	}
	offset := 0.0
	if strings.Contains(head[tc], "log") {
		if res == nil || res.Alignment == nil {
			return nil, fmt.Errorf("read load %s: column %s is in logger time and report.json gives no alignment", path, head[tc])
		}
		offset = res.Alignment.OffsetS
	}
	ls := &loadSeries{Columns: head[tc] + "," + head[lc]}
	for {
		rec, err := r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		line, _ := r.FieldPos(0)
		if err != nil {
			return nil, fmt.Errorf("read load %s: %w", path, err)
		}
		if tc >= len(rec) || lc >= len(rec) || strings.TrimSpace(rec[tc]) == "" || strings.TrimSpace(rec[lc]) == "" {
			continue
		}
		t, err1 := strconv.ParseFloat(strings.TrimSpace(rec[tc]), 64)
		g, err2 := strconv.ParseFloat(strings.TrimSpace(rec[lc]), 64)
		if err1 != nil || err2 != nil || math.IsInf(t, 0) || math.IsNaN(t) || math.IsInf(g, 0) {
			return nil, fmt.Errorf("read load %s line %d: %q, %q are not numbers", path, line, rec[tc], rec[lc])
		}
		if math.IsNaN(g) {
			continue
		}
		ls.TimeS = append(ls.TimeS, t+offset)
		ls.LoadG = append(ls.LoadG, g)
	}
	if len(ls.TimeS) == 0 {
		return nil, fmt.Errorf("read load %s: no samples", path)
	}
	if !sort.Float64sAreSorted(ls.TimeS) {
		return nil, fmt.Errorf("read load %s: times are not in order", path)
	}
	ls.thin(maxLoadPoints)
	return ls, nil
}

func pickColumn(head []string, exact []string, contains string) int {
	for _, want := range exact {
		for i, h := range head {
			if h == want {
				return i
			}
		}
	}
	for i, h := range head {
		if strings.Contains(h, contains) {
			return i
		}
	}
	return -1
}

// thin keeps at most about n samples, each bucket's lowest and highest load.
func (ls *loadSeries) thin(n int) {
	if len(ls.TimeS) <= n {
		return
	}
	buckets := n / 2
	per := float64(len(ls.TimeS)) / float64(buckets)
	var ts, gs []float64
	for b := 0; b < buckets; b++ {
		lo, hi := int(float64(b)*per), int(float64(b+1)*per)
		if hi > len(ls.TimeS) {
			hi = len(ls.TimeS)
		}
		if lo >= hi {
			continue
		}
		imin, imax := lo, lo
		for i := lo; i < hi; i++ {
			if ls.LoadG[i] < ls.LoadG[imin] {
				imin = i
			}
			if ls.LoadG[i] > ls.LoadG[imax] {
				imax = i
			}
		}
		a, c := min(imin, imax), max(imin, imax)
		ts, gs = append(ts, ls.TimeS[a]), append(gs, ls.LoadG[a])
		if c != a {
			ts, gs = append(ts, ls.TimeS[c]), append(gs, ls.LoadG[c])
		}
	}
	ls.TimeS, ls.LoadG = ts, gs
}

// at returns the load at video time t by linear interpolation; false outside
// the log.
func (ls *loadSeries) at(t float64) (float64, bool) {
	if ls == nil || len(ls.TimeS) == 0 || t < ls.TimeS[0] || t > ls.TimeS[len(ls.TimeS)-1] {
		return 0, false
	}
	i := sort.SearchFloat64s(ls.TimeS, t)
	if i == 0 || ls.TimeS[i] == t {
		return ls.LoadG[i], true
	}
	t0, t1 := ls.TimeS[i-1], ls.TimeS[i]
	return ls.LoadG[i-1] + (ls.LoadG[i]-ls.LoadG[i-1])*(t-t0)/(t1-t0), true
}
