package review

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"net/http"
	"os"
	"path"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/tracking/marks"
)

// infoJSON is the answer of GET /api/info.
type infoJSON struct {
	Clip           string   `json:"clip"`
	Width          int      `json:"width"`
	Height         int      `json:"height"`
	Frames         int      `json:"frames"`
	CaptureFPS     float64  `json:"capture_fps"`
	CaptureFPSFrom string   `json:"capture_fps_from"`
	Warnings       []string `json:"warnings"`
	MarksFile      string   `json:"marks_file"`
	MarksExists    bool     `json:"marks_exists"`
	Report         string   `json:"report,omitempty"`
	HasResult      bool     `json:"has_result"`
	HasTracks      bool     `json:"has_tracks"`
	HasLoad        bool     `json:"has_load"`
	CanSaveStill   bool     `json:"can_save_still"`
	HasHTML        bool     `json:"has_html"`
	FirstMember    string   `json:"first_member,omitempty"`
	BowLow         float64  `json:"bow_low"`
	BowHigh        float64  `json:"bow_high"`
}

func (s *Server) handleInfo(w http.ResponseWriter, r *http.Request) {
	_, err := os.Stat(s.marksPath)
	info := infoJSON{
		Clip:           filepath.Base(s.cfg.Clip),
		Width:          s.width,
		Height:         s.height,
		Frames:         s.frames.Frames(),
		CaptureFPS:     s.tb.CaptureFPS,
		CaptureFPSFrom: s.tb.From,
		Warnings:       append([]string{}, s.warnings...),
		MarksFile:      s.marksPath,
		MarksExists:    err == nil,
		HasResult:      s.result != nil,
		HasTracks:      s.tracks != nil,
		HasLoad:        s.load != nil,
		CanSaveStill:   s.reportFS != nil,
		BowLow:         bowLow,
		BowHigh:        bowHigh,
	}
	if s.cfg.Report != "" {
		info.Report = s.cfg.Report
	}
	if s.reportFS != nil {
		if st, err := s.reportFS.Stat("report.html"); err == nil && !st.IsDir() {
			info.HasHTML = true
		}
	}
	if s.result != nil {
		info.FirstMember = s.result.FirstMember
	}
	writeJSON(w, info)
}

// parseFrame reads a frame number, refusing anything but plain digits.
func parseFrame(v string) (int, error) {
	if v == "" || len(v) > 9 || strings.TrimLeft(v, "0123456789") != "" {
		return 0, fmt.Errorf("frame %q is not a frame number", v)
	}
	return strconv.Atoi(v)
}

func (s *Server) handleFrame(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	ext := gocv.FileExt(path.Ext(name))
	if ext != gocv.JPEGFileExt && ext != gocv.PNGFileExt {
		httpError(w, http.StatusNotFound, "frame %q: ask for N.jpg or N.png", name)
		return
	}
	n, err := parseFrame(strings.TrimSuffix(name, string(ext)))
	if err != nil {
		httpError(w, http.StatusBadRequest, "%v", err)
		return
	}
	data, err := s.frames.Encoded(n, ext)
	if err != nil {
		s.frameError(w, err)
		return
	}
	if ext == gocv.JPEGFileExt {
		w.Header().Set("Content-Type", "image/jpeg")
	} else {
		w.Header().Set("Content-Type", "image/png")
	}
	w.Header().Set("Content-Length", strconv.Itoa(len(data)))
	// A frame never changes while the server runs.
	w.Header().Set("Cache-Control", "private, max-age=3600")
	w.Write(data)
}

// frameError answers a frame that cannot be shown: 404 outside the clip,
// 422 for a frame the decoder could not read.
func (s *Server) frameError(w http.ResponseWriter, err error) {
	var fe *capture.FrameError
	switch {
	case errors.Is(err, errOutOfRange), errors.Is(err, capture.ErrShortClip):
		httpError(w, http.StatusNotFound, "%v", err)
	case errors.As(err, &fe):
		httpError(w, http.StatusUnprocessableEntity, "%v", err)
	default:
		httpError(w, http.StatusInternalServerError, "%v", err)
	}
}

// marksJSON is the marks file as the page sees it.
type marksJSON struct {
	Exists         bool          `json:"exists"`
	Clip           string        `json:"clip"`
	CaptureFPS     float64       `json:"capture_fps"`
	ReferenceFrame int           `json:"reference_frame"`
	Camera         *marks.Camera `json:"camera"`
	Tower          *towerJSON    `json:"tower"`
	Scale          *scaleJSON    `json:"scale"`
	Points         []pointJSON   `json:"points"`
	Members        []memberJSON  `json:"members"`
}

type towerJSON struct {
	BaseMM   float64   `json:"base_mm"`
	TopMM    float64   `json:"top_mm"`
	HeightMM float64   `json:"height_mm"`
	LevelsMM []float64 `json:"levels_mm"`
}

type scaleJSON struct {
	From string  `json:"from"`
	To   string  `json:"to"`
	MM   float64 `json:"mm"`
}

type pointJSON struct {
	ID     string      `json:"id"`
	PX     [2]float64  `json:"px"`
	Leg    string      `json:"leg,omitempty"`
	Level  *int        `json:"level,omitempty"`
	PlanMM *[2]float64 `json:"plan_mm,omitempty"`
	// Derived is the plan position derived from the tower block (read only).
	Derived *[2]float64 `json:"derived_plan_mm,omitempty"`
}

type memberJSON struct {
	ID     string   `json:"id"`
	Kind   string   `json:"kind"`
	Points []string `json:"points"`
}

func toJSON(m *marks.File) marksJSON {
	out := marksJSON{
		Exists: true, Clip: m.Clip, CaptureFPS: m.CaptureFPS, ReferenceFrame: m.ReferenceFrame,
		Camera: m.Camera, Points: []pointJSON{}, Members: []memberJSON{},
	}
	if t := m.Tower; t != nil {
		out.Tower = &towerJSON{t.BaseMM, t.TopMM, t.HeightMM, t.LevelsMM}
	}
	if sc := m.Scale; sc != nil {
		out.Scale = &scaleJSON{sc.From, sc.To, sc.MM}
	}
	for _, p := range m.Points {
		pj := pointJSON{ID: p.ID, PX: p.PX, Leg: p.Leg, Level: p.Level, PlanMM: p.PlanMM}
		q := p
		q.PlanMM = nil
		if d, ok := m.PlanOf(q); ok {
			pj.Derived = &d
		}
		out.Points = append(out.Points, pj)
	}
	for _, mb := range m.Members {
		out.Members = append(out.Members, memberJSON{mb.ID, mb.Kind, mb.Points})
	}
	return out
}

func fromJSON(in marksJSON) *marks.File {
	f := &marks.File{Clip: in.Clip, CaptureFPS: in.CaptureFPS, ReferenceFrame: in.ReferenceFrame, Camera: in.Camera}
	if t := in.Tower; t != nil {
		f.Tower = &marks.Tower{BaseMM: t.BaseMM, TopMM: t.TopMM, HeightMM: t.HeightMM, LevelsMM: t.LevelsMM}
	}
	if sc := in.Scale; sc != nil {
		f.Scale = &marks.Scale{From: sc.From, To: sc.To, MM: sc.MM}
	}
	for _, p := range in.Points {
		f.Points = append(f.Points, marks.Point{ID: strings.TrimSpace(p.ID), PX: p.PX, Leg: p.Leg, Level: p.Level, PlanMM: p.PlanMM})
	}
	for _, mb := range in.Members {
		f.Members = append(f.Members, marks.Member{ID: strings.TrimSpace(mb.ID), Kind: mb.Kind, Points: mb.Points})
	}
	return f
}

func (s *Server) handleGetMarks(w http.ResponseWriter, r *http.Request) {
	m, err := marks.Load(s.marksPath)
	if errors.Is(err, fs.ErrNotExist) {
		writeJSON(w, marksJSON{Points: []pointJSON{}, Members: []memberJSON{}})
		return
	}
	if err != nil {
		httpError(w, http.StatusUnprocessableEntity, "%v", err)
		return
	}
	writeJSON(w, toJSON(m))
}

func (s *Server) handlePutMarks(w http.ResponseWriter, r *http.Request) {
	var in marksJSON
	dec := json.NewDecoder(r.Body)
	dec.DisallowUnknownFields()
	if err := dec.Decode(&in); err != nil {
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			httpError(w, http.StatusRequestEntityTooLarge, "marks over the %d byte limit", MaxBody)
			return
		}
		httpError(w, http.StatusBadRequest, "marks: %v", err)
		return
	}
	f := fromJSON(in)
	if f.Clip == "" {
		if rel, err := filepath.Rel(filepath.Dir(absOr(s.marksPath)), absOr(s.cfg.Clip)); err == nil {
			f.Clip = filepath.ToSlash(rel)
		}
	}
	if f.CaptureFPS == 0 && s.tb.From != capture.RateFromContainer {
		f.CaptureFPS = s.tb.CaptureFPS
	}
	if f.ReferenceFrame >= s.frames.Frames() {
		httpError(w, http.StatusUnprocessableEntity, "marks: reference_frame %d is past the clip's last frame %d", f.ReferenceFrame, s.frames.Frames()-1)
		return
	}
	for _, p := range f.Points {
		if math.IsNaN(p.PX[0]) || math.IsNaN(p.PX[1]) {
			httpError(w, http.StatusUnprocessableEntity, "marks: point %s has no position", p.ID)
			return
		}
	}
	if err := f.Validate(); err != nil {
		httpError(w, http.StatusUnprocessableEntity, "%v", withPath(err, s.marksPath))
		return
	}
	if err := f.CheckBounds(s.width, s.height); err != nil {
		httpError(w, http.StatusUnprocessableEntity, "%v", withPath(err, s.marksPath))
		return
	}
	if err := marks.Save(s.marksPath, f); err != nil {
		httpError(w, http.StatusInternalServerError, "%v", err)
		return
	}
	back, err := marks.Load(s.marksPath)
	if err != nil {
		httpError(w, http.StatusInternalServerError, "saved marks do not read back: %v", err)
		return
	}
	writeJSON(w, toJSON(back))
}

func withPath(err error, p string) error {
	var me *marks.Error
	if errors.As(err, &me) && me.Path == "" {
		me.Path = p
	}
	return err
}

func absOr(p string) string {
	if a, err := filepath.Abs(p); err == nil {
		return a
	}
	return p
}

func (s *Server) handleReport(w http.ResponseWriter, r *http.Request) {
	if s.result == nil {
		httpError(w, http.StatusNotFound, "no report.json was given")
		return
	}
	writeJSON(w, s.result)
}

// overlayJSON is the answer of GET /api/tracks?frame=N.
type overlayJSON struct {
	Frame   int             `json:"frame"`
	Tracked bool            `json:"tracked"`
	Points  []overlayPoint  `json:"points"`
	Members []overlayMember `json:"members"`
}

type overlayPoint struct {
	ID      string   `json:"id"`
	X       *float64 `json:"x"`
	Y       *float64 `json:"y"`
	Quality float64  `json:"quality"`
	Lost    bool     `json:"lost"`
}

type overlayMember struct {
	ID      string   `json:"id"`
	Kind    string   `json:"kind"`
	Points  []string `json:"points"`
	BowFrac *float64 `json:"bow_frac"`
	Color   string   `json:"color"`
	First   bool     `json:"first"`
}

func (s *Server) handleTracks(w http.ResponseWriter, r *http.Request) {
	n, err := parseFrame(r.URL.Query().Get("frame"))
	if err != nil {
		httpError(w, http.StatusBadRequest, "%v", err)
		return
	}
	if n >= s.frames.Frames() {
		httpError(w, http.StatusNotFound, "frame %d is past the clip's last frame %d", n, s.frames.Frames()-1)
		return
	}
	writeJSON(w, s.overlay(n))
}

// overlay returns the tracked points and members of frame n.
func (s *Server) overlay(n int) overlayJSON {
	out := overlayJSON{Frame: n, Points: []overlayPoint{}, Members: []overlayMember{}}
	if s.tracks == nil {
		return out
	}
	row := s.tracks.Row(n)
	if row < 0 {
		return out
	}
	out.Tracked = true
	for j, id := range s.tracks.IDs {
		sm := s.tracks.Samples[row][j]
		p := overlayPoint{ID: id, Quality: sm.Quality, Lost: sm.Lost}
		if !sm.Lost && !math.IsNaN(sm.X) && !math.IsNaN(sm.Y) {
			x, y := sm.X, sm.Y
			p.X, p.Y = &x, &y
		}
		out.Points = append(out.Points, p)
	}
	first := ""
	if s.result != nil {
		first = s.result.FirstMember
	}
	if s.analysed != nil {
		for _, m := range s.analysed.Members {
			om := overlayMember{ID: m.ID, Kind: m.Kind, Points: m.Points, First: m.ID == first}
			if b, ok := s.bow.at(m.ID, n); ok {
				om.BowFrac = &b
			}
			om.Color = hexColor(bowColor(om.BowFrac))
			out.Members = append(out.Members, om)
		}
	}
	return out
}

func (s *Server) handleLoad(w http.ResponseWriter, r *http.Request) {
	if s.load == nil {
		httpError(w, http.StatusNotFound, "no load.csv in the report folder")
		return
	}
	writeJSON(w, s.load)
}

func (s *Server) handleFile(w http.ResponseWriter, r *http.Request) {
	if s.reportFS == nil {
		httpError(w, http.StatusNotFound, "no report folder was given")
		return
	}
	p := r.PathValue("path")
	if !fs.ValidPath(p) {
		httpError(w, http.StatusBadRequest, "path %q leaves the report folder", p)
		return
	}
	f, err := s.reportFS.Open(p)
	if err != nil {
		httpError(w, http.StatusNotFound, "no file %q in the report folder", p)
		return
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil || st.IsDir() {
		httpError(w, http.StatusNotFound, "no file %q in the report folder", p)
		return
	}
	http.ServeContent(w, r, st.Name(), st.ModTime(), f)
}

// stillRequest is the body of POST /api/still.
type stillRequest struct {
	Frame   int  `json:"frame"`
	Points  bool `json:"points"`
	Members bool `json:"members"`
	Labels  bool `json:"labels"`
}

func (s *Server) handleStill(w http.ResponseWriter, r *http.Request) {
	if s.reportFS == nil {
		httpError(w, http.StatusConflict, "no report folder was given (--report), so there is nowhere to keep stills")
		return
	}
	var req stillRequest
	dec := json.NewDecoder(r.Body)
	dec.DisallowUnknownFields()
	if err := dec.Decode(&req); err != nil {
		httpError(w, http.StatusBadRequest, "still: %v", err)
		return
	}
	img, err := s.frames.Mat(req.Frame)
	if err != nil {
		img.Close()
		s.frameError(w, err)
		return
	}
	defer img.Close()
	s.drawStill(&img, req)
	buf, err := gocv.IMEncode(gocv.PNGFileExt, img)
	if err != nil {
		httpError(w, http.StatusInternalServerError, "still: encode: %v", err)
		return
	}
	data := bytes.Clone(buf.GetBytes())
	buf.Close()
	name := fmt.Sprintf("evidence/review-frame-%06d.png", req.Frame)
	if err := writeRootAtomic(s.reportFS, name, data); err != nil {
		httpError(w, http.StatusInternalServerError, "still: %v", err)
		return
	}
	writeJSON(w, map[string]any{"file": name, "bytes": len(data)})
}

// writeRootAtomic writes name inside root through a temporary file and a rename.
func writeRootAtomic(root *os.Root, name string, data []byte) error {
	if err := root.MkdirAll(path.Dir(name), 0o755); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	tmp := fmt.Sprintf("%s/.%s.tmp%d-%d", path.Dir(name), path.Base(name), os.Getpid(), tmpSeq.Add(1))
	f, err := root.OpenFile(tmp, os.O_CREATE|os.O_WRONLY|os.O_TRUNC, 0o644)
	if err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	defer root.Remove(tmp)
	if _, err := f.Write(data); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := root.Rename(tmp, name); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	return nil
}

// tmpSeq numbers temporary files so that concurrent writes do not collide.
var tmpSeq atomic.Int64
