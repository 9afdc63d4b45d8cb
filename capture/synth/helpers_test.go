package synth

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/failframe/failframe/tracking/marks"
)

// fmtSscan reads "a,b" into two numbers.
func fmtSscan(line string, a, b *float64) (int, error) {
	return fmt.Sscanf(strings.Replace(line, ",", " ", 1), "%g %g", a, b)
}

// marksRoundTrip saves and re-loads a marks file, returning its text.
func marksRoundTrip(f *marks.File) (string, error) {
	dir, err := os.MkdirTemp("", "synth-marks")
	if err != nil {
		return "", err
	}
	defer os.RemoveAll(dir)
	p := filepath.Join(dir, "marks.yaml")
	if err := marks.Save(p, f); err != nil {
		return "", err
	}
	data, _ := os.ReadFile(p)
	_, err = marks.Load(p)
	return string(data), err
}
