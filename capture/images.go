package capture

import (
	"encoding/binary"
	"errors"
	"fmt"
	"image"
	_ "image/jpeg" // header decoding for the size check
	_ "image/png"
	"io"
	"math/big"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strings"

	"gocv.io/x/gocv"
)

// imageExts are the still-image file types read from a folder, by extension.
var imageExts = map[string]string{
	".png": "png", ".jpg": "jpeg", ".jpeg": "jpeg", ".tif": "tiff", ".tiff": "tiff",
}

// lastNumber finds the last run of digits in a file name (without extension).
var lastNumber = regexp.MustCompile(`[0-9]+`)

// frameColumn returns which run of digits in the file names numbers the
// frames: the first position whose values are all different, when every
// name has the same count of runs; -1 (use the last run) otherwise.
func frameColumn(n int, runs func(i int) []string) int {
	if n < 2 {
		return -1
	}
	k := len(runs(0))
	for i := 1; i < n; i++ {
		if len(runs(i)) != k {
			return -1
		}
	}
	for col := 0; col < k; col++ {
		seen := make(map[string]bool, n)
		distinct := true
		for i := 0; i < n && distinct; i++ {
			v := strings.TrimLeft(runs(i)[col], "0")
			distinct = !seen[v]
			seen[v] = true
		}
		if distinct {
			return col
		}
	}
	return -1
}

// imageSource reads a folder of numbered stills, one file per frame. The
// number in each file name (its last run of digits) is its frame number,
// counted from the lowest; a number with no file is a missing frame. When
// the names hold several numbers, the first one that differs between all
// files is the frame number.
type imageSource struct {
	info  Info
	files []string // by frame number; "" where the numbering skips
	gaps  []imageGap
	next  int
}

// imageGap is a run of missing frame numbers in an image folder.
type imageGap struct {
	from, to     int // first and last missing frame
	before, next string
}

// openImages opens a folder of numbered stills (PNG, JPEG or TIFF). Files are
// ordered by the number in their names (natural order: img_2 before
// img_10). Duplicate numbers, unnumbered images, unreadable headers and
// mixed frame sizes are errors naming the file; a gap in the numbering is a
// warning in Info.Warnings and a *FrameError when the missing frame is read.
func openImages(dir string, opt Options) (Source, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, &ClipError{Path: dir, Err: err}
	}
	type still struct {
		name string
		num  *big.Int
		runs []string
	}
	var stills []still
	formats := map[string]bool{}
	for _, e := range entries {
		if e.IsDir() {
			continue
		}
		ext := strings.ToLower(filepath.Ext(e.Name()))
		format, ok := imageExts[ext]
		if !ok {
			continue
		}
		digits := lastNumber.FindAllString(strings.TrimSuffix(e.Name(), filepath.Ext(e.Name())), -1)
		if len(digits) == 0 {
			return nil, &ClipError{Path: dir, Err: fmt.Errorf("image %s has no frame number in its name", e.Name())}
		}
		n, _ := new(big.Int).SetString(digits[len(digits)-1], 10)
		stills = append(stills, still{e.Name(), n, digits})
		formats[format] = true
	}
	if len(stills) == 0 {
		return nil, &ClipError{Path: dir, Err: errors.New("no PNG, JPEG or TIFF images in the folder")}
	}
	// Names with several numbers (a camera number, a date, a time stamp
	// after the frame number as in frame-000123_t0.128125s.png): the frame
	// number is the first run of digits that differs between all files.
	if col := frameColumn(len(stills), func(i int) []string { return stills[i].runs }); col >= 0 {
		for i := range stills {
			stills[i].num, _ = new(big.Int).SetString(stills[i].runs[col], 10)
		}
	}
	sort.Slice(stills, func(i, j int) bool { return stills[i].num.Cmp(stills[j].num) < 0 })
	for i := 1; i < len(stills); i++ {
		if stills[i].num.Cmp(stills[i-1].num) == 0 {
			return nil, &ClipError{Path: dir, Err: fmt.Errorf("images %s and %s have the same frame number %s", stills[i-1].name, stills[i].name, stills[i].num)}
		}
	}
	first, last := stills[0].num, stills[len(stills)-1].num
	span := new(big.Int).Sub(last, first)
	if !span.IsInt64() || span.Int64() > int64(10*len(stills)+1000) {
		return nil, &ClipError{Path: dir, Err: fmt.Errorf("the numbering runs from %s (%s) to %s (%s) with only %d images; are these one clip?",
			first, stills[0].name, last, stills[len(stills)-1].name, len(stills))}
	}
	s := &imageSource{files: make([]string, span.Int64()+1)}
	var warnings []string
	for i, st := range stills {
		f := new(big.Int).Sub(st.num, first).Int64()
		s.files[f] = filepath.Join(dir, st.name)
		if i > 0 {
			prev := new(big.Int).Sub(stills[i-1].num, first).Int64()
			if f > prev+1 {
				g := imageGap{from: int(prev + 1), to: int(f - 1), before: stills[i-1].name, next: st.name}
				s.gaps = append(s.gaps, g)
				missing := fmt.Sprintf("frames %d to %d are missing", g.from, g.to)
				if g.from == g.to {
					missing = fmt.Sprintf("frame %d is missing", g.from)
				}
				warnings = append(warnings, fmt.Sprintf("numbering skips from %s to %s: %s", g.before, g.next, missing))
			}
		}
	}
	// Check every image's size from its header (cheap: no pixels decoded).
	w, h := 0, 0
	for _, st := range stills {
		p := filepath.Join(dir, st.name)
		cw, ch, err := imageSize(p)
		if err != nil {
			return nil, &ClipError{Path: dir, Err: fmt.Errorf("image %s: %w", st.name, err)}
		}
		if w == 0 {
			w, h = cw, ch
		} else if cw != w || ch != h {
			return nil, &ClipError{Path: dir, Err: fmt.Errorf("image %s is %dx%d but %s is %dx%d: mixed frame sizes", st.name, cw, ch, stills[0].name, w, h)}
		}
	}
	var names []string
	for f := range formats {
		names = append(names, f)
	}
	sort.Strings(names)
	s.info = Info{
		Path:         dir,
		Width:        w,
		Height:       h,
		Codec:        strings.Join(names, "+"),
		ContainerFPS: opt.ImageFPS,
		FrameCount:   len(s.files),
		CountSource:  "counted",
		Warnings:     warnings,
		IntraOnly:    true,
	}
	return s, nil
}

// imageSize reads the frame size from an image file's header.
func imageSize(path string) (int, int, error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, 0, err
	}
	defer f.Close()
	if ext := strings.ToLower(filepath.Ext(path)); ext == ".tif" || ext == ".tiff" {
		return tiffSize(f)
	}
	cfg, _, err := image.DecodeConfig(f)
	if err != nil {
		return 0, 0, fmt.Errorf("not a readable image: %w", err)
	}
	return cfg.Width, cfg.Height, nil
}

func (s *imageSource) Info() Info { return s.info }

func (s *imageSource) Read(dst *gocv.Mat) (int, error) {
	if s.next >= len(s.files) {
		return s.next, io.EOF
	}
	f := s.next
	s.next++
	p := s.files[f]
	if p == "" {
		i := sort.Search(len(s.gaps), func(i int) bool { return s.gaps[i].to >= f })
		g := s.gaps[i]
		return f, &FrameError{Path: s.info.Path, Frame: f, Err: fmt.Errorf("no image for this frame: the numbering skips from %s to %s", g.before, g.next)}
	}
	// Pixels as stored, ignoring any EXIF orientation, so that every
	// frame has the size its header states.
	img := gocv.IMRead(p, gocv.IMReadColor|gocv.IMReadIgnoreOrientation)
	defer img.Close()
	if img.Empty() {
		return f, &FrameError{Path: p, Frame: f, Err: errors.New("image could not be decoded")}
	}
	if img.Cols() != s.info.Width || img.Rows() != s.info.Height {
		return f, &FrameError{Path: p, Frame: f, Err: fmt.Errorf("image is %dx%d, the clip is %dx%d", img.Cols(), img.Rows(), s.info.Width, s.info.Height)}
	}
	img.CopyTo(dst)
	return f, nil
}

func (s *imageSource) Seek(frame int) error {
	if frame < 0 || frame >= len(s.files) {
		return &FrameError{Path: s.info.Path, Frame: frame, Err: fmt.Errorf("seek: no such frame (the clip has frames 0 to %d)", len(s.files)-1)}
	}
	s.next = frame
	return nil
}

func (s *imageSource) Close() error { return nil }

// tiffSize reads ImageWidth and ImageLength from a TIFF file's first image
// directory (TIFF 6.0, section 2), whatever the pixel layout.
func tiffSize(r io.ReaderAt) (int, int, error) {
	bad := errors.New("not a readable image: bad TIFF header")
	hdr := make([]byte, 8)
	if _, err := r.ReadAt(hdr, 0); err != nil {
		return 0, 0, bad
	}
	var bo binary.ByteOrder
	switch string(hdr[:2]) {
	case "II":
		bo = binary.LittleEndian
	case "MM":
		bo = binary.BigEndian
	default:
		return 0, 0, bad
	}
	if bo.Uint16(hdr[2:]) != 42 {
		return 0, 0, bad
	}
	off := int64(bo.Uint32(hdr[4:]))
	cnt := make([]byte, 2)
	if _, err := r.ReadAt(cnt, off); err != nil {
		return 0, 0, bad
	}
	n := int(bo.Uint16(cnt))
	entries := make([]byte, 12*n)
	if _, err := r.ReadAt(entries, off+2); err != nil {
		return 0, 0, bad
	}
	w, h := 0, 0
	for i := 0; i < n; i++ {
		e := entries[12*i:]
		var v int
		switch bo.Uint16(e[2:]) { // field type
		case 3: // SHORT
			v = int(bo.Uint16(e[8:]))
		case 4: // LONG
			v = int(bo.Uint32(e[8:]))
		default:
			continue
		}
		switch bo.Uint16(e) {
		case 256:
			w = v
		case 257:
			h = v
		}
	}
	if w <= 0 || h <= 0 {
		return 0, 0, bad
	}
	return w, h, nil
}
