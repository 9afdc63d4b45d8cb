package marks

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"
)

// Error is a problem in a marks file, with the line it was found on (0 when
// the problem is not tied to one line).
type Error struct {
	// Path is the marks file.
	Path string
	// Line is the 1-based YAML line, or 0.
	Line int
	// Err is the problem.
	Err error
}

func (e *Error) Error() string {
	if e.Path == "" {
		if e.Line > 0 {
			return fmt.Sprintf("marks line %d: %v", e.Line, e.Err)
		}
		return fmt.Sprintf("marks: %v", e.Err)
	}
	if e.Line > 0 {
		return fmt.Sprintf("marks %s line %d: %v", e.Path, e.Line, e.Err)
	}
	return fmt.Sprintf("marks %s: %v", e.Path, e.Err)
}

// Unwrap returns the underlying problem.
func (e *Error) Unwrap() error { return e.Err }

// Load reads and checks a marks file. Frame bounds are not checked here
// (see File.CheckBounds), since the frame size comes from the clip.
func Load(path string) (*File, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read marks %s: %w", path, err)
	}
	return Parse(path, data)
}

// Parse decodes marks from data; path is used in error messages only.
// Unknown keys, repeated keys, malformed values and the rule breaks Validate
// finds are errors naming the YAML line.
func Parse(path string, data []byte) (*File, error) {
	if len(bytes.TrimSpace(data)) == 0 {
		return nil, &Error{Path: path, Err: errors.New("empty file: want at least a points list")}
	}
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil {
		return nil, lineError(path, err)
	}
	if err := checkShape(&root); err != nil {
		err.Path = path
		return nil, err
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	var f File
	if err := dec.Decode(&f); err != nil {
		var te *yaml.TypeError
		if errors.As(err, &te) {
			return nil, lineError(path, errors.New(te.Errors[0]))
		}
		return nil, lineError(path, err)
	}
	attachLines(&root, &f)
	f.path = path
	if err := f.Validate(); err != nil {
		var me *Error
		if errors.As(err, &me) {
			me.Path = path
			return nil, me
		}
		return nil, &Error{Path: path, Err: err}
	}
	return &f, nil
}

var (
	lineRE    = regexp.MustCompile(`^(?:yaml: )?line (\d+): (.*)$`)
	unknownRE = regexp.MustCompile(`^field (\S+) not found in type marks\.(\w+)$`)
)

// lineError turns a YAML error into an *Error with the line it names.
func lineError(path string, err error) *Error {
	msg := err.Error()
	e := &Error{Path: path, Err: err}
	if m := lineRE.FindStringSubmatch(msg); m != nil {
		e.Line, _ = strconv.Atoi(m[1])
		msg = m[2]
		e.Err = errors.New(msg)
	}
	if m := unknownRE.FindStringSubmatch(msg); m != nil {
		e.Err = fmt.Errorf("unknown key %q in %s", m[1], strings.ToLower(m[2]))
	}
	return e
}

// checkShape finds what the decoder would accept silently or report without
// a line: a point without px, or px that is not two numbers.
func checkShape(root *yaml.Node) *Error {
	if root.Kind != yaml.DocumentNode || len(root.Content) == 0 {
		return nil
	}
	m := root.Content[0]
	if m.Kind != yaml.MappingNode {
		return &Error{Line: m.Line, Err: errors.New("the file must be a mapping of keys (points, members, ...)")}
	}
	for i := 0; i+1 < len(m.Content); i += 2 {
		if m.Content[i].Value != "points" || m.Content[i+1].Kind != yaml.SequenceNode {
			continue
		}
		for _, pt := range m.Content[i+1].Content {
			if pt.Kind != yaml.MappingNode {
				continue
			}
			var px *yaml.Node
			for k := 0; k+1 < len(pt.Content); k += 2 {
				if pt.Content[k].Value == "px" {
					px = pt.Content[k+1]
				}
			}
			if px == nil {
				return &Error{Line: pt.Line, Err: errors.New("point without px (its [x, y] position in pixels in the reference frame)")}
			}
			if px.Kind != yaml.SequenceNode || len(px.Content) != 2 {
				return &Error{Line: px.Line, Err: errors.New("px must be two numbers, [x, y] in pixels")}
			}
		}
	}
	return nil
}

// attachLines records the YAML line of each top-level key, point and member.
func attachLines(root *yaml.Node, f *File) {
	if root.Kind != yaml.DocumentNode || len(root.Content) == 0 {
		return
	}
	m := root.Content[0]
	f.keyLines = map[string]int{}
	for i := 0; i+1 < len(m.Content); i += 2 {
		key, val := m.Content[i], m.Content[i+1]
		f.keyLines[key.Value] = key.Line
		switch key.Value {
		case "points":
			for j, n := range val.Content {
				if j < len(f.Points) {
					f.Points[j].Line = n.Line
				}
			}
		case "members":
			for j, n := range val.Content {
				if j < len(f.Members) {
					f.Members[j].Line = n.Line
				}
			}
		}
	}
}

// Save writes f to path atomically: to a temporary file beside it, then a rename.
func Save(path string, f *File) error {
	data, err := yaml.Marshal(f)
	if err != nil {
		return fmt.Errorf("encode marks %s: %w", path, err)
	}
	return writeAtomic(path, data)
}

func writeAtomic(path string, data []byte) error {
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("write marks %s: %w", path, err)
	}
	// A marks file is shared with other tools: keep the old file's mode, or
	// make a new one readable by all like any file the user saves.
	mode := os.FileMode(0o644)
	if st, err := os.Stat(path); err == nil {
		mode = st.Mode().Perm()
	}
	if err := tmp.Chmod(mode); err != nil {
		tmp.Close()
		return fmt.Errorf("write marks %s: %w", path, err)
	}
	defer os.Remove(tmp.Name())
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		return fmt.Errorf("write marks %s: %w", path, err)
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return fmt.Errorf("write marks %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write marks %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("write marks %s: %w", path, err)
	}
	return nil
}
