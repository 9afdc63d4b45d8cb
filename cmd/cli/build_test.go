package cli

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strings"
	"testing"

	"github.com/spf13/cobra"

	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/report/records"
)

// runBuildArgs runs `build ARGS` with capturing runners and returns the
// error of the command.
func runBuildArgs(t *testing.T, io *IOStreams, r buildRunners, env map[string]string, args ...string) error {
	t.Helper()
	cmd := newBuildCmdWith(io, r, func(k string) string { return env[k] })
	cmd.SetArgs(args)
	cmd.SetOut(io.Out)
	cmd.SetErr(io.ErrOut)
	cmd.SetFlagErrorFunc(func(c *cobra.Command, err error) error { return &FlagError{Err: err} })
	_, err := cmd.ExecuteC()
	return err
}

func TestBuildArgsToOptions(t *testing.T) {
	io, _, _ := testIO()
	var add *buildAddOptions
	var edit *buildEditOptions
	var cmp *buildCompareOptions
	var rm *buildRemoveOptions
	r := buildRunners{
		add:     func(o *buildAddOptions) error { add = o; return nil },
		edit:    func(o *buildEditOptions) error { edit = o; return nil },
		compare: func(o *buildCompareOptions) error { cmp = o; return nil },
		remove:  func(o *buildRemoveOptions) error { rm = o; return nil },
		export:  func(o *buildExportOptions) error { return nil },
	}
	err := runBuildArgs(t, io, r, nil, "add", "T7", "--db", "/x/b.db", "--name", "Tall Heron", "--mass-g", "21.4",
		"--bracing", "diagonal", "--height-mm", "280", "--base-mm", "100", "--top-mm", "50", "--date", "2026-03-14",
		"--member", "legs:balsa:3x3 mm", "--member", "braces:balsa:2x2 mm", "--glue", "wood glue", "--notes", "n",
		"--tag", "a,b", "--tag", "c")
	if err != nil {
		t.Fatal(err)
	}
	want := buildFields{Name: "Tall Heron", Date: "2026-03-14", MassG: 21.4, HeightMM: 280, BaseMM: 100, TopMM: 50,
		Bracing: "diagonal", Members: []string{"legs:balsa:3x3 mm", "braces:balsa:2x2 mm"}, Glue: "wood glue", Notes: "n",
		Tags: []string{"a", "b", "c"}}
	if add.ID != "T7" || add.G.DB != "/x/b.db" || !reflect.DeepEqual(add.Fields, want) {
		t.Errorf("add options %+v %+v", add, add.Fields)
	}
	if p, _ := add.G.dbPath(); p != "/x/b.db" {
		t.Errorf("db path %s", p)
	}

	if err := runBuildArgs(t, io, r, nil, "edit", "T7", "--mass-g", "20", "--add-tag", "finals"); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(edit.Changed, map[string]bool{"mass-g": true, "add-tag": true}) || edit.Fields.MassG != 20 || !reflect.DeepEqual(edit.AddTags, []string{"finals"}) {
		t.Errorf("edit options %+v", edit)
	}
	if err := runBuildArgs(t, io, r, nil, "compare", "--tag", "spring", "--out", "cmp"); err != nil || cmp.Tag != "spring" || cmp.Out != "cmp" || len(cmp.IDs) != 0 {
		t.Errorf("compare options %+v, %v", cmp, err)
	}
	if err := runBuildArgs(t, io, r, nil, "remove", "T7", "--yes"); err != nil || !rm.Yes || rm.ID != "T7" {
		t.Errorf("remove options %+v, %v", rm, err)
	}
	// The default database comes from the environment.
	env := map[string]string{"XDG_DATA_HOME": "/data"}
	if err := runBuildArgs(t, io, r, env, "add", "T8", "--name", "n", "--mass-g", "1", "--bracing", "x"); err != nil {
		t.Fatal(err)
	}
	if p, _ := add.G.dbPath(); p != "/data/failframe/builds.db" {
		t.Errorf("default db path %s", p)
	}

	usage := []struct {
		name string
		args []string
	}{
		{"add without name", []string{"add", "T7", "--mass-g", "2", "--bracing", "x"}},
		{"add without mass", []string{"add", "T7", "--name", "n", "--bracing", "x"}},
		{"bad member", []string{"add", "T7", "--name", "n", "--mass-g", "2", "--bracing", "x", "--member", "legs balsa"}},
		{"add without id", []string{"add", "--name", "n", "--mass-g", "2", "--bracing", "x"}},
		{"edit nothing", []string{"edit", "T7"}},
		{"edit tag and add-tag", []string{"edit", "T7", "--tag", "a", "--add-tag", "b"}},
		{"compare ids and tag", []string{"compare", "T7", "--tag", "a"}},
		{"export without out", []string{"export", "T7"}},
		{"remove not at a terminal", []string{"remove", "T7"}},
		{"mass not a number", []string{"add", "T7", "--name", "n", "--mass-g", "heavy", "--bracing", "x"}},
	}
	for _, tt := range usage {
		t.Run(tt.name, func(t *testing.T) {
			err := runBuildArgs(t, io, r, nil, tt.args...)
			if exitCode(err) != ExitUsage {
				t.Errorf("%v: exit %d (%v), want %d", tt.args, exitCode(err), err, ExitUsage)
			}
		})
	}
}

// writeReport writes an invented report folder with report.WriteResult.
func writeReport(t *testing.T, peak float64, mode string) string {
	t.Helper()
	dir := t.TempDir()
	os.MkdirAll(filepath.Join(dir, "evidence"), 0o755)
	if err := os.WriteFile(filepath.Join(dir, "evidence", "first.png"), []byte("\x89PNG\r\n\x1a\ninvented "+mode), 0o644); err != nil {
		t.Fatal(err)
	}
	mass := 21.4
	eff := peak / mass
	res := &report.Result{Version: report.ResultVersion, Tool: "failframe test", FailureMode: mode, FirstMember: "AB-d1",
		Account: "AB-d1 bowed and broke first.", PeakLoadG: &peak, MassG: &mass, Efficiency: &eff,
		Alignment: &report.Alignment{Method: "auto", OffsetS: 0.5, UncertaintyS: 0.01},
		Files:     []string{"report.json", "evidence/first.png"}}
	if err := report.WriteResult(dir, res); err != nil {
		t.Fatal(err)
	}
	return dir
}

func TestBuildCommandsEndToEnd(t *testing.T) {
	db := filepath.Join(t.TempDir(), "store", "builds.db")
	run := func(args ...string) (int, string, string) {
		io, out, errOut := testIO()
		code := Run(io, append([]string{"build", "--db", db}, args...))
		return code, out.String(), errOut.String()
	}
	mustRun := func(args ...string) string {
		t.Helper()
		code, out, errOut := run(args...)
		if code != ExitOK {
			t.Fatalf("%v: exit %d: %s", args, code, errOut)
		}
		return out
	}
	mustRun("add", "T7", "--name", "Tall Heron", "--mass-g", "21.4", "--bracing", "diagonal", "--date", "2026-03-14",
		"--member", "legs:balsa:3x3 mm", "--tag", "spring")
	mustRun("add", "H2", "--name", "Square Wren", "--mass-g", "18", "--bracing", "horizontal", "--date", "2026-03-01", "--tag", "spring")
	out := mustRun("list")
	if !regexp.MustCompile(`(?m)^H2\s+2026-03-01\s+Square Wren\s+18\.00\s+horizontal\s+0\s+-\s+spring$`).MatchString(out) ||
		strings.Index(out, "H2") > strings.Index(out, "T7") {
		t.Errorf("list:\n%s", out)
	}
	rep := writeReport(t, 9000, "brace_buckling")
	mustRun("attach", "T7", rep)
	_, _, errOut := run("attach", "T7", rep)
	if !strings.Contains(errOut, "Already attached") {
		t.Errorf("re-attach said %q", errOut)
	}
	mustRun("edit", "T7", "--notes", "re-weighed", "--add-tag", "finals")
	out = mustRun("show", "T7", "--json")
	var bt buildWithTests
	if err := json.Unmarshal([]byte(out), &bt); err != nil {
		t.Fatal(err)
	}
	if bt.Build.Notes != "re-weighed" || !reflect.DeepEqual(bt.Build.Tags, []string{"finals", "spring"}) || len(bt.Tests) != 1 ||
		*bt.Tests[0].PeakLoadG != 9000 || len(bt.Tests[0].Files) != 2 {
		t.Errorf("show --json: %+v", bt)
	}
	out = mustRun("show", "T7")
	for _, want := range []string{"bracing:  diagonal", "legs: balsa 3x3 mm", "failure mode: brace_buckling", "efficiency:   420.6", "video time = log time +0.500 s"} {
		if !strings.Contains(out, want) {
			t.Errorf("show lacks %q:\n%s", want, out)
		}
	}
	cmpDir := filepath.Join(t.TempDir(), "cmp")
	out = mustRun("compare", "--tag", "spring", "--out", cmpDir)
	if !regexp.MustCompile(`(?m)^T7\s+diagonal\s+21\.40\s+9000\s+420\.6\s+brace_buckling\s+AB-d1$`).MatchString(out) {
		t.Errorf("compare:\n%s", out)
	}
	if _, err := os.Stat(filepath.Join(cmpDir, "compare.html")); err != nil {
		t.Error(err)
	}
	zip := filepath.Join(t.TempDir(), "T7.zip")
	mustRun("export", "T7", "--out", zip)
	db2 := filepath.Join(t.TempDir(), "other.db")
	io, _, errBuf := testIO()
	if code := Run(io, []string{"build", "--db", db2, "import", zip}); code != ExitOK {
		t.Fatalf("import: %d %s", code, errBuf)
	}
	io, out2, _ := testIO()
	Run(io, []string{"build", "--db", db2, "show", "T7", "--json"})
	var bt2 buildWithTests
	json.Unmarshal(out2.Bytes(), &bt2)
	if !reflect.DeepEqual(bt, bt2) {
		t.Errorf("imported record differs:\n%+v\n%+v", bt, bt2)
	}
	if out := mustRun("check"); !strings.Contains(out, "ok") {
		t.Errorf("check: %s", out)
	}

	// Bad input exits 3 and writes nothing.
	notReport := t.TempDir()
	os.WriteFile(filepath.Join(notReport, "report.json"), []byte(`{"frames": 3}`), 0o644)
	bad := []struct {
		name    string
		args    []string
		code    int
		mention string
	}{
		{"unknown id", []string{"show", "NOPE"}, ExitBadInput, `"NOPE"`},
		{"attach to unknown id", []string{"attach", "NOPE", rep}, ExitBadInput, `"NOPE"`},
		{"not a report", []string{"attach", "T7", notReport}, ExitBadInput, "not a failframe report"},
		{"negative mass", []string{"add", "N1", "--name", "n", "--mass-g", "-3", "--bracing", "x"}, ExitBadInput, "mass_g"},
		{"duplicate id", []string{"add", "T7", "--name", "n", "--mass-g", "3", "--bracing", "x"}, ExitBadInput, "already"},
		{"bad bracing", []string{"add", "N2", "--name", "n", "--mass-g", "3", "--bracing", "zigzag"}, ExitBadInput, "bracing"},
		{"import twice", []string{"import", zip}, ExitBadInput, "already"},
		{"compare unknown tag", []string{"compare", "--tag", "nope"}, ExitBadInput, "nope"},
	}
	for _, tt := range bad {
		t.Run(tt.name, func(t *testing.T) {
			code, _, errOut := run(tt.args...)
			if code != tt.code || !strings.Contains(errOut, tt.mention) {
				t.Errorf("%v: exit %d, stderr %q; want %d mentioning %q", tt.args, code, errOut, tt.code, tt.mention)
			}
		})
	}
	if out := mustRun("list"); strings.Count(out, "\n") != 3 {
		t.Errorf("bad input changed the list:\n%s", out)
	}

	// A changed evidence file makes check exit 3 and name it.
	s, err := records.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	ts, _ := s.Tests("T7")
	objects := s.ObjectsDir()
	s.Close()
	var png records.File
	for _, f := range ts[0].Files {
		if f.Path == "evidence/first.png" {
			png = f
		}
	}
	obj := filepath.Join(objects, png.SHA256[:2], png.SHA256)
	os.Chmod(obj, 0o644)
	os.WriteFile(obj, []byte("changed"), 0o644)
	code, out, _ := run("check")
	if code != ExitBadInput || !strings.Contains(out, "corrupt: build T7 test 1 file evidence/first.png") {
		t.Errorf("check after damage: exit %d\n%s", code, out)
	}

	// remove: asks at a terminal; "n" cancels (exit 4), --yes removes.
	io, _, errBuf = testIO()
	io.InIsTerminal, io.In = true, strings.NewReader("n\n")
	if code := Run(io, []string{"build", "--db", db, "remove", "T7"}); code != ExitCancelled || !strings.Contains(errBuf.String(), "Remove build T7") {
		t.Errorf("declined remove: exit %d, %s", code, errBuf)
	}
	io, _, _ = testIO()
	io.InIsTerminal, io.In = true, strings.NewReader("y\n")
	if code := Run(io, []string{"build", "--db", db, "remove", "T7"}); code != ExitOK {
		t.Errorf("accepted remove: exit %d", code)
	}
	if code, _, _ := run("remove", "H2"); code != ExitUsage {
		t.Errorf("remove without a terminal or --yes: exit %d, want %d", code, ExitUsage)
	}
	mustRun("remove", "H2", "--yes")
	io, _, errBuf = testIO()
	if code := Run(io, []string{"build", "--db", db, "check", "--prune"}); code != ExitOK || !strings.Contains(errBuf.String(), "Pruned 0 unused file(s)") {
		t.Errorf("check --prune right after removing: exit %d, %s (fresh objects are kept)", code, errBuf)
	}
	if out := mustRun("list", "--json"); strings.TrimSpace(out) != "[]" {
		t.Errorf("after removing all: %s", out)
	}
}

func TestBuildDefaultDBFromEnvironment(t *testing.T) {
	dir := t.TempDir()
	t.Setenv("FAILFRAME_DB", filepath.Join(dir, "env.db"))
	io, _, errOut := testIO()
	if code := Run(io, []string{"build", "add", "E1", "--name", "env", "--mass-g", "5", "--bracing", "z"}); code != ExitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	if _, err := os.Stat(filepath.Join(dir, "env.db")); err != nil {
		t.Errorf("FAILFRAME_DB not used: %v", err)
	}
	for _, err := range []error{
		fmt.Errorf("add: %w", &records.Error{BuildID: "X", Err: records.ErrInvalid}),
		&records.IntegrityError{Problems: []records.Problem{{Kind: "missing"}}},
	} {
		if exitCode(err) != ExitBadInput {
			t.Errorf("exitCode(%v) = %d, want %d", err, exitCode(err), ExitBadInput)
		}
	}
}
