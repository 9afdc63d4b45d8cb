package marks

import (
	"os"
	"path/filepath"
	"testing"
)

// A saved marks file is readable by other tools (common practice: 0644 for a
// user's document), and saving over a file keeps that file's mode.
func TestSaveFileMode(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "m.yaml")
	f := &File{Points: []Point{{ID: "A0", PX: [2]float64{10, 20}}}}
	if err := Save(path, f); err != nil {
		t.Fatal(err)
	}
	st, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if got := st.Mode().Perm(); got != 0o644 {
		t.Errorf("new marks file mode %o, want 644", got)
	}
	if err := os.Chmod(path, 0o600); err != nil {
		t.Fatal(err)
	}
	if err := Save(path, f); err != nil {
		t.Fatal(err)
	}
	st, _ = os.Stat(path)
	if got := st.Mode().Perm(); got != 0o600 {
		t.Errorf("re-saved marks file mode %o, want the old 600 kept", got)
	}
}
