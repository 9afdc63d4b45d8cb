// Package review serves the review page: one clip, stepped frame by frame in
// a browser, with the tracked points, member bow, events and the aligned load
// of one report folder laid over it, and a marking mode that writes the marks
// file. The page and its script are embedded, so it works offline.
//
// The server is small on purpose: it listens on the loopback interface unless
// told otherwise, serves only the one clip, marks file and report folder,
// refuses paths that leave the report folder, request bodies over MaxBody and
// frame numbers outside the clip (404), and checks the Host header so that a
// web page elsewhere cannot read or write through it.
//
// Pixel coordinates follow OpenCV: pixel centres sit on integer coordinates,
// so the image spans -0.5 to width-0.5. The page converts a click at display
// position (dx, dy) with display scale s (display pixels per image pixel) to
// image coordinates (dx/s - 0.5, dy/s - 0.5).
package review

import (
	"context"
	"embed"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

//go:embed static
var staticFS embed.FS

// MaxBody is the largest request body accepted, in bytes.
const MaxBody = 1 << 20

// cacheBytes bounds the cache of encoded frames.
const cacheBytes = 48 << 20

// Config says what to review.
type Config struct {
	// Clip is the video file or folder of numbered stills to review. Required.
	Clip string
	// Marks is the marks file to show and edit; it need not exist yet. Default:
	// the clip's path with its extension replaced by ".marks.yaml".
	Marks string
	// Report is a report folder written by analyze; optional.
	Report string
	// CaptureFPS overrides the capture rate (0 = from the marks, the report,
	// else the container).
	CaptureFPS float64
}

// Server is a running review of one clip.
type Server struct {
	cfg    Config
	frames *frameStore
	tb     capture.Timebase
	width  int
	height int

	warnings []string

	marksPath string
	// analysed are the marks the report's tracks refer to (the marks file as
	// read at start).
	analysed *marks.File

	result   *report.Result
	tracks   *tracks.Tracks
	bow      *bowTable
	load     *loadSeries
	reportFS *os.Root

	allowedHosts map[string]bool
}

// New opens the clip, the marks file when it exists, and the report folder
// when given. The caller closes the Server.
func New(cfg Config) (*Server, error) {
	if cfg.Clip == "" {
		return nil, errors.New("review: no clip given")
	}
	// For a folder of stills the capture rate is the only rate there is.
	src, err := capture.Open(cfg.Clip, capture.Options{ImageFPS: cfg.CaptureFPS})
	if err != nil {
		return nil, err
	}
	s := &Server{cfg: cfg, frames: newFrameStore(src, cacheBytes)}
	ok := false
	defer func() {
		if !ok {
			s.Close()
		}
	}()
	info := src.Info()
	s.width, s.height = info.Width, info.Height
	if s.width <= 0 || s.height <= 0 {
		return nil, fmt.Errorf("open clip %s: frame size %dx%d is not usable", cfg.Clip, s.width, s.height)
	}
	if s.frames.frames <= 0 {
		if err := s.frames.count(); err != nil {
			return nil, err
		}
	}

	s.marksPath = cfg.Marks
	if s.marksPath == "" {
		s.marksPath = strings.TrimSuffix(cfg.Clip, filepath.Ext(cfg.Clip)) + ".marks.yaml"
	}
	if _, err := os.Stat(s.marksPath); err == nil {
		m, err := marks.Load(s.marksPath)
		if err != nil {
			return nil, err
		}
		if err := m.CheckBounds(s.width, s.height); err != nil {
			var me *marks.Error
			if errors.As(err, &me) {
				me.Path = s.marksPath
			}
			return nil, err
		}
		s.analysed = m
	} else if !errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("read marks %s: %w", s.marksPath, err)
	}

	if cfg.Report != "" {
		if err := s.openReport(cfg.Report); err != nil {
			return nil, err
		}
	}

	var marksFPS float64
	switch {
	case s.analysed != nil && s.analysed.CaptureFPS > 0:
		marksFPS = s.analysed.CaptureFPS
	case s.result != nil && s.result.CaptureFPS > 0:
		marksFPS = s.result.CaptureFPS
	}
	tb, warn, err := capture.ChooseRate(cfg.CaptureFPS, marksFPS, info.ContainerFPS)
	if err != nil {
		return nil, fmt.Errorf("clip %s: %w", cfg.Clip, err)
	}
	s.tb = tb
	if warn != "" {
		s.warnings = append(s.warnings, warn)
	}
	ok = true
	return s, nil
}

// count finds the frame count by reading the clip once, for containers that
// do not state it.
func (s *frameStore) count() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if err := s.src.Seek(0); err != nil {
		return err
	}
	n := 0
	for {
		got, err := s.src.Read(&s.mat)
		if err != nil {
			var fe *capture.FrameError
			if errors.As(err, &fe) {
				n = got + 1
				continue
			}
			break
		}
		n = got + 1
	}
	s.frames = n
	s.next = -1 << 30
	if n == 0 {
		return fmt.Errorf("open clip %s: no frames could be read", s.path)
	}
	return nil
}

// openReport reads what the page shows from a report folder.
func (s *Server) openReport(dir string) error {
	st, err := os.Stat(dir)
	if err != nil {
		return fmt.Errorf("open report %s: %w", dir, err)
	}
	if !st.IsDir() {
		return fmt.Errorf("open report %s: not a folder", dir)
	}
	root, err := os.OpenRoot(dir)
	if err != nil {
		return fmt.Errorf("open report %s: %w", dir, err)
	}
	s.reportFS = root
	res, err := report.ReadResult(dir)
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	s.result = res
	tr, err := readTracks(filepath.Join(dir, "points.csv"))
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	s.tracks = tr
	bt, err := readMemberBow(filepath.Join(dir, "members.csv"))
	switch {
	case err == nil:
		s.bow = bt
	case !errors.Is(err, fs.ErrNotExist):
		return err
	case tr != nil && s.analysed != nil:
		s.bow = newBowTable(s.analysed, tr)
	}
	ld, err := readLoad(filepath.Join(dir, "load.csv"), res)
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	s.load = ld
	return nil
}

// Close releases the clip and the report folder.
func (s *Server) Close() error {
	if s.reportFS != nil {
		s.reportFS.Close()
	}
	return s.frames.Close()
}

// MarksPath returns the marks file the page reads and writes.
func (s *Server) MarksPath() string { return s.marksPath }

// Timebase returns the capture rate in use.
func (s *Server) Timebase() capture.Timebase { return s.tb }

// Warnings returns what the user should know (a guessed capture rate, say).
func (s *Server) Warnings() []string { return append([]string(nil), s.warnings...) }

// Listen opens a listener on addr ("host:port"; port 0 picks a free one).
// An empty host means the loopback interface 127.0.0.1.
func Listen(addr string) (net.Listener, error) {
	host, port, err := net.SplitHostPort(addr)
	if err != nil {
		return nil, fmt.Errorf("listen %s: %w", addr, err)
	}
	if host == "" {
		host = "127.0.0.1"
	}
	ln, err := net.Listen("tcp", net.JoinHostPort(host, port))
	if err != nil {
		return nil, fmt.Errorf("listen %s: %w", addr, err)
	}
	return ln, nil
}

// URL returns the page's address for a listener, naming 127.0.0.1 for a
// wildcard address.
func URL(ln net.Listener) string {
	addr := ln.Addr().(*net.TCPAddr)
	host := addr.IP.String()
	if addr.IP.IsUnspecified() {
		host = "127.0.0.1"
	}
	return "http://" + net.JoinHostPort(host, strconv.Itoa(addr.Port)) + "/"
}

// Serve answers requests on ln until ctx ends.
func (s *Server) Serve(ctx context.Context, ln net.Listener) error {
	srv := &http.Server{
		Handler:           s.HandlerFor(ln),
		ReadHeaderTimeout: 10 * time.Second,
	}
	done := make(chan struct{})
	go func() {
		select {
		case <-ctx.Done():
			sctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
			defer cancel()
			srv.Shutdown(sctx)
		case <-done:
		}
	}()
	err := srv.Serve(ln)
	close(done)
	if errors.Is(err, http.ErrServerClosed) {
		return nil
	}
	return err
}

// HandlerFor returns the page's handler for a listener: on a loopback
// listener only requests naming a loopback host are answered.
func (s *Server) HandlerFor(ln net.Listener) http.Handler {
	addr := ln.Addr().(*net.TCPAddr)
	if addr.IP.IsLoopback() {
		p := strconv.Itoa(addr.Port)
		s.allowedHosts = map[string]bool{
			"127.0.0.1:" + p: true, "localhost:" + p: true, "[::1]:" + p: true,
		}
	}
	return s.Handler()
}

// Handler returns the page's handler.
func (s *Server) Handler() http.Handler {
	mux := http.NewServeMux()
	static, _ := fs.Sub(staticFS, "static")
	mux.HandleFunc("GET /{$}", func(w http.ResponseWriter, r *http.Request) {
		serveStatic(w, r, static, "index.html")
	})
	mux.HandleFunc("GET /static/{name}", func(w http.ResponseWriter, r *http.Request) {
		serveStatic(w, r, static, r.PathValue("name"))
	})
	mux.HandleFunc("GET /api/info", s.handleInfo)
	mux.HandleFunc("GET /api/frame/{name}", s.handleFrame)
	mux.HandleFunc("GET /api/marks", s.handleGetMarks)
	mux.HandleFunc("PUT /api/marks", s.handlePutMarks)
	mux.HandleFunc("GET /api/report", s.handleReport)
	mux.HandleFunc("GET /api/tracks", s.handleTracks)
	mux.HandleFunc("GET /api/load", s.handleLoad)
	mux.HandleFunc("POST /api/still", s.handleStill)
	mux.HandleFunc("GET /files/{path...}", s.handleFile)
	return s.guard(mux)
}

// guard applies the checks every request passes: a known Host, a bounded
// body, JSON for writes, and no path that climbs out with "..".
func (s *Server) guard(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if s.allowedHosts != nil && !s.allowedHosts[r.Host] {
			httpError(w, http.StatusForbidden, "host %q is not this review server", r.Host)
			return
		}
		if hasDotDot(r.URL.Path) || hasDotDot(r.URL.RawPath) {
			httpError(w, http.StatusBadRequest, "path %q leaves the served folder", r.URL.Path)
			return
		}
		if r.Body != nil {
			r.Body = http.MaxBytesReader(w, r.Body, MaxBody)
		}
		if r.ContentLength > MaxBody {
			httpError(w, http.StatusRequestEntityTooLarge, "request body of %d bytes is over the %d byte limit", r.ContentLength, MaxBody)
			return
		}
		if r.Method == http.MethodPut || r.Method == http.MethodPost {
			if ct := r.Header.Get("Content-Type"); !strings.HasPrefix(ct, "application/json") {
				httpError(w, http.StatusUnsupportedMediaType, "send JSON (Content-Type application/json), not %q", ct)
				return
			}
		}
		w.Header().Set("X-Content-Type-Options", "nosniff")
		w.Header().Set("Cache-Control", "no-store")
		next.ServeHTTP(w, r)
	})
}

func hasDotDot(p string) bool {
	if !strings.Contains(p, "..") {
		return false
	}
	for _, seg := range strings.FieldsFunc(p, func(r rune) bool { return r == '/' || r == '\\' }) {
		if seg == ".." || strings.EqualFold(seg, "%2e%2e") {
			return true
		}
	}
	return false
}

func serveStatic(w http.ResponseWriter, r *http.Request, fsys fs.FS, name string) {
	data, err := fs.ReadFile(fsys, name)
	if err != nil {
		httpError(w, http.StatusNotFound, "no page asset %q", name)
		return
	}
	switch filepath.Ext(name) {
	case ".html":
		w.Header().Set("Content-Type", "text/html; charset=utf-8")
	case ".js":
		w.Header().Set("Content-Type", "text/javascript; charset=utf-8")
	case ".css":
		w.Header().Set("Content-Type", "text/css; charset=utf-8")
	}
	w.Write(data)
}

// httpError answers with a JSON error message.
func httpError(w http.ResponseWriter, code int, format string, args ...any) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("X-Content-Type-Options", "nosniff")
	w.WriteHeader(code)
	json.NewEncoder(w).Encode(map[string]string{"error": fmt.Sprintf(format, args...)})
}

func writeJSON(w http.ResponseWriter, v any) {
	w.Header().Set("Content-Type", "application/json")
	enc := json.NewEncoder(w)
	if err := enc.Encode(v); err != nil {
		// Headers are gone; nothing more to tell the client.
		return
	}
}
