package records

import (
	"bytes"
	"encoding/base64"
	"errors"
	stdhtml "html"
	"image/png"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

func TestCompareTableAndPage(t *testing.T) {
	s := newStore(t)
	builds := []struct {
		id, bracing string
		mass        float64
		peak        float64 // 0 = untested
		mode, first string
	}{
		{"H1", "horizontal", 18.0, 3600, "leg_full_height", "leg-A"},
		{"D1", "diagonal", 21.4, 9200, "brace_buckling", "AB-d1"},
		{"X1", "x", 24.0, 0, "", ""},
	}
	for i, c := range builds {
		b := sampleBuild(c.id)
		b.Bracing, b.MassG, b.Tags = c.bracing, c.mass, []string{"spring"}
		if _, err := s.Add(b); err != nil {
			t.Fatal(err)
		}
		if c.peak > 0 {
			dir := fakeReport(t, t.TempDir(), uint8(i), c.peak, c.mode, c.first)
			if _, err := s.Attach(c.id, dir); err != nil {
				t.Fatal(err)
			}
		}
	}
	other := sampleBuild("Z9")
	other.Tags = []string{"autumn"}
	if _, err := s.Add(other); err != nil {
		t.Fatal(err)
	}
	rows, err := s.Compare(nil, "spring")
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 3 {
		t.Fatalf("%d rows for tag spring, want 3", len(rows))
	}
	var buf bytes.Buffer
	if err := WriteCompareTable(&buf, rows); err != nil {
		t.Fatal(err)
	}
	// Efficiency = load / mass (common practice); the fake reports carry
	// mass 21.4 g, so 3600/21.4 = 168.2 and 9200/21.4 = 429.9.
	for _, want := range []string{
		`(?m)^TEST\s+BRACING\s+MASS_G\s+PEAK_LOAD_G\s+EFFICIENCY\s+FAILURE_MODE\s+FIRST_MEMBER$`,
		`(?m)^D1\s+diagonal\s+21\.40\s+9200\s+429\.9\s+brace_buckling\s+AB-d1$`,
		`(?m)^H1\s+horizontal\s+21\.40\s+3600\s+168\.2\s+leg_full_height\s+leg-A$`,
		`(?m)^X1\s+x\s+24\.00\s+-\s+-\s+untested\s+-$`,
	} {
		if !regexp.MustCompile(want).MatchString(buf.String()) {
			t.Errorf("table lacks %s:\n%s", want, buf.String())
		}
	}
	if strings.Contains(buf.String(), "Z9") {
		t.Error("build without the tag listed")
	}

	dir := filepath.Join(t.TempDir(), "cmp")
	page, err := WriteComparePage(dir, rows, "Spring builds")
	if err != nil {
		t.Fatal(err)
	}
	html, err := os.ReadFile(page)
	if err != nil {
		t.Fatal(err)
	}
	imgs := regexp.MustCompile(`src="data:image/png;base64,([^"]+)"`).FindAllStringSubmatch(string(html), -1)
	if len(imgs) != 3 {
		t.Fatalf("page has %d embedded images, want 3", len(imgs))
	}
	for i, m := range imgs {
		raw, err := base64.StdEncoding.DecodeString(stdhtml.UnescapeString(m[1]))
		if err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(bytes.NewReader(raw))
		if err != nil || img.Bounds().Dx() < 100 {
			t.Errorf("image %d: %v", i, err)
		}
	}
	for _, want := range []string{"Spring builds", "Efficiency by build", "Failure modes by bracing pattern", "<td>brace_buckling</td>"} {
		if !strings.Contains(string(html), want) {
			t.Errorf("page lacks %q", want)
		}
	}
	if strings.Contains(string(html), "http://") || strings.Contains(string(html), "https://") {
		t.Error("page refers to outside resources; it must be self-contained")
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 || ents[0].Name() != ComparePageFile {
		t.Errorf("output folder holds %v; want only %s (no temporary files)", ents, ComparePageFile)
	}

	// With no efficiency at all the page still renders, with notes.
	rows, err = s.Compare([]string{"X1"}, "")
	if err != nil || len(rows) != 1 {
		t.Fatal(rows, err)
	}
	p, err := ComparePage(rows, "one")
	if err != nil || !strings.Contains(string(p), "No test here has an efficiency") {
		t.Errorf("page without tests: %v", err)
	}
	if _, err := s.Compare([]string{"D1", "NOPE"}, ""); !errors.Is(err, ErrUnknownBuild) {
		t.Errorf("unknown id: %v", err)
	}
}
