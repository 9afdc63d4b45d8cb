package marks

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"

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
func Parse(path string, data []byte) (*File, error) {
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil {
		return nil, &Error{Path: path, Err: err}
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	var f File
	if err := dec.Decode(&f); err != nil {
		var te *yaml.TypeError
		if errors.As(err, &te) {
			return nil, &Error{Path: path, Err: errors.New(te.Errors[0])}
		}
		return nil, &Error{Path: path, Err: err}
	}
	attachLines(&root, &f)
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

// attachLines records the YAML line of each point and member.
func attachLines(root *yaml.Node, f *File) {
	if root.Kind != yaml.DocumentNode || len(root.Content) == 0 {
		return
	}
	m := root.Content[0]
	for i := 0; i+1 < len(m.Content); i += 2 {
		key, val := m.Content[i], m.Content[i+1]
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
