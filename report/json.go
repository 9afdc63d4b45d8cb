package report

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
)

// WriteResult writes r as dir/report.json, atomically (temporary file, then rename).
func WriteResult(dir string, r *Result) error {
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetIndent("", "  ")
	if err := enc.Encode(r); err != nil {
		return fmt.Errorf("write %s: %w", ResultFile, err)
	}
	return WriteFileAtomic(filepath.Join(dir, ResultFile), buf.Bytes())
}

// ReadResult reads dir/report.json. A version newer than ResultVersion or a
// file that is not a report is an error naming the file.
func ReadResult(dir string) (*Result, error) {
	path := filepath.Join(dir, ResultFile)
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read report %s: %w", path, err)
	}
	var r Result
	if err := json.Unmarshal(data, &r); err != nil {
		return nil, fmt.Errorf("read report %s: %w", path, err)
	}
	switch {
	case r.Version == 0:
		return nil, fmt.Errorf("read report %s: no version field; not a failframe report", path)
	case r.Version > ResultVersion:
		return nil, fmt.Errorf("read report %s: version %d is newer than this program's %d", path, r.Version, ResultVersion)
	}
	return &r, nil
}

// WriteFileAtomic writes data to path through a temporary file in the same
// folder and a rename, so path is either the old file or the whole new one.
func WriteFileAtomic(path string, data []byte) error {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	tmp := f.Name()
	_, werr := f.Write(data)
	if werr == nil {
		werr = f.Sync()
	}
	cerr := f.Close()
	if werr == nil {
		werr = cerr
	}
	if werr == nil {
		werr = os.Chmod(tmp, 0o644)
	}
	if werr == nil {
		werr = os.Rename(tmp, path)
	}
	if werr != nil {
		os.Remove(tmp)
		return fmt.Errorf("write %s: %w", path, werr)
	}
	return nil
}
