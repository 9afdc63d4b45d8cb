package cli

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"github.com/failframe/failframe/report/records"
)

func init() { commands = append(commands, newBuildCmd) }

// buildGlobal holds the flags shared by every `failframe build` sub-command.
type buildGlobal struct {
	// DB is the database path from --db ("" = the default).
	DB string
	// getenv reads the environment (os.Getenv; tests replace it).
	getenv func(string) string
}

// dbPath returns the database path to use.
func (g *buildGlobal) dbPath() (string, error) {
	if g.DB != "" {
		return g.DB, nil
	}
	return records.DefaultPath(g.getenv)
}

// open opens the build record store.
func (g *buildGlobal) open() (*records.Store, error) {
	p, err := g.dbPath()
	if err != nil {
		return nil, err
	}
	return records.Open(p)
}

// buildRunners replaces sub-commands' run functions in tests; nil = the real one.
type buildRunners struct {
	add     func(*buildAddOptions) error
	list    func(*buildListOptions) error
	show    func(*buildShowOptions) error
	edit    func(*buildEditOptions) error
	remove  func(*buildRemoveOptions) error
	attach  func(*buildAttachOptions) error
	compare func(*buildCompareOptions) error
	export  func(*buildExportOptions) error
	imp     func(*buildImportOptions) error
	check   func(*buildCheckOptions) error
}

func newBuildCmd(io *IOStreams) *cobra.Command {
	return newBuildCmdWith(io, buildRunners{}, os.Getenv)
}

func newBuildCmdWith(io *IOStreams, r buildRunners, getenv func(string) string) *cobra.Command {
	g := &buildGlobal{getenv: getenv}
	cmd := &cobra.Command{
		Use:   "build",
		Short: "Keep build records, attach test reports, compare builds",
		Long: `Build keeps a record of every tower or bridge you build: its mass, size,
bracing pattern, wood and sections, glue, notes and tags, and the analysis
reports of its load tests with their evidence files. Compare builds across a
season by efficiency (load held / own mass), failure mode and first member.

The records live in one SQLite database; attached report files are copied
into an "objects" folder beside it, named by their SHA-256 and stored once.
The database is --db, else $FAILFRAME_DB, else
$XDG_DATA_HOME/failframe/builds.db, else ~/.local/share/failframe/builds.db.` + exitHelp,
		Args: exactArgs(0),
		RunE: func(cmd *cobra.Command, args []string) error { return cmd.Help() },
	}
	cmd.PersistentFlags().StringVar(&g.DB, "db", "", "build record database file (default: $FAILFRAME_DB, else $XDG_DATA_HOME/failframe/builds.db, else ~/.local/share/failframe/builds.db)")
	cmd.AddCommand(
		newBuildAddCmd(io, g, r.add),
		newBuildListCmd(io, g, r.list),
		newBuildShowCmd(io, g, r.show),
		newBuildEditCmd(io, g, r.edit),
		newBuildRemoveCmd(io, g, r.remove),
		newBuildAttachCmd(io, g, r.attach),
		newBuildCompareCmd(io, g, r.compare),
		newBuildExportCmd(io, g, r.export),
		newBuildImportCmd(io, g, r.imp),
		newBuildCheckCmd(io, g, r.check),
	)
	return cmd
}

// buildFields are the build flags shared by add and edit.
type buildFields struct {
	Name     string
	Date     string
	MassG    float64
	HeightMM float64
	BaseMM   float64
	TopMM    float64
	Bracing  string
	Members  []string
	Glue     string
	Notes    string
	Tags     []string
}

func bindBuildFields(cmd *cobra.Command, f *buildFields) {
	fl := cmd.Flags()
	fl.StringVar(&f.Name, "name", "", "the build's name")
	fl.StringVar(&f.Date, "date", "", "build date YYYY-MM-DD (default: today)")
	fl.Float64Var(&f.MassG, "mass-g", 0, "structure's own mass in grams (more than 0)")
	fl.Float64Var(&f.HeightMM, "height-mm", 0, "height in mm (0 = not recorded)")
	fl.Float64Var(&f.BaseMM, "base-mm", 0, "base width in mm (0 = not recorded)")
	fl.Float64Var(&f.TopMM, "top-mm", 0, "top width in mm (0 = not recorded)")
	fl.StringVar(&f.Bracing, "bracing", "", "bracing pattern: "+strings.Join(records.Bracings, ", "))
	fl.StringArrayVar(&f.Members, "member", nil, `wood and section of a member group as GROUP:WOOD:SECTION, e.g. "legs:balsa:3x3 mm" (repeat per group)`)
	fl.StringVar(&f.Glue, "glue", "", "glue used")
	fl.StringVar(&f.Notes, "notes", "", "builder's notes")
	fl.StringSliceVar(&f.Tags, "tag", nil, "free tag (repeat, or separate with commas)")
}

// parseMembers reads GROUP:WOOD:SECTION values.
func parseMembers(vals []string) ([]records.Member, error) {
	out := []records.Member{}
	for _, v := range vals {
		parts := strings.SplitN(v, ":", 3)
		if len(parts) != 3 || strings.TrimSpace(parts[0]) == "" || strings.TrimSpace(parts[1]) == "" || strings.TrimSpace(parts[2]) == "" {
			return nil, &FlagError{Err: fmt.Errorf("--member %q: write GROUP:WOOD:SECTION, e.g. \"legs:balsa:3x3 mm\"", v)}
		}
		out = append(out, records.Member{Group: parts[0], Wood: parts[1], Section: parts[2]})
	}
	return out, nil
}

// ---- add

// buildAddOptions are the settings of `failframe build add`.
type buildAddOptions struct {
	IO *IOStreams
	G  *buildGlobal

	ID     string
	Fields buildFields
	// Today is the date used when --date is not given.
	Today string
}

func newBuildAddCmd(io *IOStreams, g *buildGlobal, runF func(*buildAddOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildAddRun
	}
	opts := &buildAddOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "add ID --name NAME --mass-g G --bracing PATTERN [flags]",
		Short: "Record a new build",
		Long: `Add records a new build under a short ID of your choice (letters, digits, '.',
'_' or '-'). --name, --mass-g and --bracing are required; the rest may be
filled in later with "failframe build edit".` + exitHelp,
		Example: `  failframe build add T7 --name "Tall Heron" --mass-g 21.4 --bracing diagonal \
    --height-mm 280 --base-mm 100 --top-mm 50 \
    --member "legs:balsa:3x3 mm" --member "braces:balsa:2x2 mm" \
    --glue "wood glue" --tag spring --notes "leg B slightly bowed"`,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ID = args[0]
			for _, name := range []string{"name", "mass-g", "bracing"} {
				if !cmd.Flags().Changed(name) {
					return &FlagError{Err: fmt.Errorf("--%s is required", name)}
				}
			}
			if _, err := parseMembers(opts.Fields.Members); err != nil {
				return err
			}
			opts.Today = time.Now().Format(records.DateLayout)
			return runF(opts)
		},
	}
	bindBuildFields(cmd, &opts.Fields)
	return cmd
}

func buildAddRun(opts *buildAddOptions) error {
	f := opts.Fields
	members, err := parseMembers(f.Members)
	if err != nil {
		return err
	}
	date := f.Date
	if date == "" {
		date = opts.Today
	}
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	b, err := s.Add(records.Build{
		ID: opts.ID, Name: f.Name, Date: date, MassG: f.MassG, HeightMM: f.HeightMM, BaseMM: f.BaseMM, TopMM: f.TopMM,
		Bracing: f.Bracing, Members: members, Glue: f.Glue, Notes: f.Notes, Tags: f.Tags,
	})
	if err != nil {
		return err
	}
	fmt.Fprintf(opts.IO.ErrOut, "Added build %s (%s) to %s\n", b.ID, b.Name, s.Path())
	return nil
}

// ---- list

// buildListOptions are the settings of `failframe build list`.
type buildListOptions struct {
	IO *IOStreams
	G  *buildGlobal

	Tag  string
	JSON bool
}

func newBuildListCmd(io *IOStreams, g *buildGlobal, runF func(*buildListOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildListRun
	}
	opts := &buildListOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "list [--tag TAG] [--json]",
		Short: "List the recorded builds",
		Long: `List prints one line per build, oldest first: id, date, name, mass, bracing,
number of tests, best efficiency and tags. --json prints the records instead.` + exitHelp,
		Args: exactArgs(0),
		RunE: func(cmd *cobra.Command, args []string) error { return runF(opts) },
	}
	cmd.Flags().StringVar(&opts.Tag, "tag", "", "only builds with this tag")
	cmd.Flags().BoolVar(&opts.JSON, "json", false, "print JSON records")
	return cmd
}

// buildWithTests is one build and its tests as printed by list/show --json.
type buildWithTests struct {
	Build records.Build  `json:"build"`
	Tests []records.Test `json:"tests"`
}

func buildListRun(opts *buildListOptions) error {
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	builds, err := s.List(opts.Tag)
	if err != nil {
		return err
	}
	all := make([]buildWithTests, 0, len(builds))
	for _, b := range builds {
		ts, err := s.Tests(b.ID)
		if err != nil {
			return err
		}
		if ts == nil {
			ts = []records.Test{}
		}
		all = append(all, buildWithTests{b, ts})
	}
	if opts.JSON {
		return writeJSON(opts.IO, all)
	}
	tw := tabwriter.NewWriter(opts.IO.Out, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tDATE\tNAME\tMASS_G\tBRACING\tTESTS\tBEST_EFFICIENCY\tTAGS")
	for _, bt := range all {
		best := "-"
		var bestV float64
		for _, t := range bt.Tests {
			if t.Efficiency != nil && (best == "-" || *t.Efficiency > bestV) {
				bestV = *t.Efficiency
				best = strconv.FormatFloat(bestV, 'f', 1, 64)
			}
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%.2f\t%s\t%d\t%s\t%s\n", bt.Build.ID, bt.Build.Date, bt.Build.Name, bt.Build.MassG,
			bt.Build.Bracing, len(bt.Tests), best, strings.Join(bt.Build.Tags, ","))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if len(all) == 0 {
		fmt.Fprintf(opts.IO.ErrOut, "No builds recorded in %s\n", s.Path())
	}
	return nil
}

func writeJSON(io *IOStreams, v any) error {
	enc := json.NewEncoder(io.Out)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// ---- show

// buildShowOptions are the settings of `failframe build show`.
type buildShowOptions struct {
	IO *IOStreams
	G  *buildGlobal

	ID   string
	JSON bool
}

func newBuildShowCmd(io *IOStreams, g *buildGlobal, runF func(*buildShowOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildShowRun
	}
	opts := &buildShowOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "show ID [--json]",
		Short: "Show one build and its tests",
		Long:  `Show prints every field of a build and, for each attached test, its result and files.` + exitHelp,
		Args:  exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ID = args[0]
			return runF(opts)
		},
	}
	cmd.Flags().BoolVar(&opts.JSON, "json", false, "print the JSON record")
	return cmd
}

func buildShowRun(opts *buildShowOptions) error {
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	b, err := s.Get(opts.ID)
	if err != nil {
		return err
	}
	ts, err := s.Tests(opts.ID)
	if err != nil {
		return err
	}
	if ts == nil {
		ts = []records.Test{}
	}
	if opts.JSON {
		return writeJSON(opts.IO, buildWithTests{*b, ts})
	}
	w := opts.IO.Out
	dim := func(v float64, unit string) string {
		if v == 0 {
			return "-"
		}
		return strconv.FormatFloat(v, 'f', -1, 64) + " " + unit
	}
	fmt.Fprintf(w, "%s  %s\n", b.ID, b.Name)
	fmt.Fprintf(w, "  date:     %s\n", b.Date)
	fmt.Fprintf(w, "  mass:     %s\n", dim(b.MassG, "g"))
	fmt.Fprintf(w, "  height:   %s\n", dim(b.HeightMM, "mm"))
	fmt.Fprintf(w, "  base:     %s\n", dim(b.BaseMM, "mm"))
	fmt.Fprintf(w, "  top:      %s\n", dim(b.TopMM, "mm"))
	fmt.Fprintf(w, "  bracing:  %s\n", b.Bracing)
	for i, m := range b.Members {
		label := "members: "
		if i > 0 {
			label = "         "
		}
		fmt.Fprintf(w, "  %s %s: %s %s\n", label, m.Group, m.Wood, m.Section)
	}
	fmt.Fprintf(w, "  glue:     %s\n", orNone(b.Glue))
	fmt.Fprintf(w, "  tags:     %s\n", orNone(strings.Join(b.Tags, ", ")))
	fmt.Fprintf(w, "  notes:    %s\n", orNone(strings.ReplaceAll(b.Notes, "\n", "\n            ")))
	fmt.Fprintf(w, "  recorded: %s, changed %s\n", b.CreatedAt, b.UpdatedAt)
	if len(ts) == 0 {
		fmt.Fprintln(w, "  tests:    none attached")
	}
	for _, t := range ts {
		fmt.Fprintf(w, "test %d  (attached %s from %s)\n", t.Seq, t.AttachedAt, t.SourceDir)
		fmt.Fprintf(w, "  peak load:    %s\n", optUnit(t.PeakLoadG, 0, " g"))
		fmt.Fprintf(w, "  efficiency:   %s\n", optUnit(t.Efficiency, 1, ""))
		fmt.Fprintf(w, "  failure mode: %s\n", orNone(t.FailureMode))
		fmt.Fprintf(w, "  first member: %s\n", orNone(t.FirstMember))
		if t.Account != "" {
			fmt.Fprintf(w, "  account:      %s\n", t.Account)
		}
		if a := t.Alignment; a != nil {
			fmt.Fprintf(w, "  alignment:    %s, video time = log time %+.3f s (± %.3f s)\n", a.Method, a.OffsetS, a.UncertaintyS)
		}
		fmt.Fprintf(w, "  files:        %d\n", len(t.Files))
		for _, f := range t.Files {
			fmt.Fprintf(w, "    %s  %s  %d bytes\n", f.SHA256[:12], f.Path, f.Size)
		}
	}
	return nil
}

func orNone(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

func optUnit(p *float64, prec int, unit string) string {
	if p == nil {
		return "-"
	}
	return strconv.FormatFloat(*p, 'f', prec, 64) + unit
}

// ---- edit

// buildEditOptions are the settings of `failframe build edit`.
type buildEditOptions struct {
	IO *IOStreams
	G  *buildGlobal

	ID     string
	Fields buildFields
	// Changed lists the flags given, by name; only those fields change.
	Changed    map[string]bool
	AddTags    []string
	RemoveTags []string
}

func newBuildEditCmd(io *IOStreams, g *buildGlobal, runF func(*buildEditOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildEditRun
	}
	opts := &buildEditOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "edit ID [flags]",
		Short: "Change fields of a build",
		Long: `Edit changes only the fields whose flags are given. --member replaces all
member groups and --tag all tags; --add-tag and --remove-tag change single
tags. The ID cannot change.` + exitHelp,
		Example: `  failframe build edit T7 --mass-g 21.1 --notes "re-weighed after drying"
  failframe build edit T7 --add-tag finals`,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ID = args[0]
			opts.Changed = map[string]bool{}
			cmd.Flags().Visit(func(f *pflag.Flag) { opts.Changed[f.Name] = true })
			delete(opts.Changed, "db")
			if len(opts.Changed) == 0 {
				return &FlagError{Err: errors.New("nothing to change: give at least one field flag")}
			}
			if opts.Changed["tag"] && (opts.Changed["add-tag"] || opts.Changed["remove-tag"]) {
				return &FlagError{Err: errors.New("--tag replaces all tags; do not combine it with --add-tag or --remove-tag")}
			}
			if _, err := parseMembers(opts.Fields.Members); err != nil {
				return err
			}
			return runF(opts)
		},
	}
	bindBuildFields(cmd, &opts.Fields)
	cmd.Flags().StringSliceVar(&opts.AddTags, "add-tag", nil, "add a tag (repeat, or separate with commas)")
	cmd.Flags().StringSliceVar(&opts.RemoveTags, "remove-tag", nil, "remove a tag (repeat, or separate with commas)")
	return cmd
}

func buildEditRun(opts *buildEditOptions) error {
	f, c := opts.Fields, opts.Changed
	members, err := parseMembers(f.Members)
	if err != nil {
		return err
	}
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	b, err := s.Edit(opts.ID, func(b *records.Build) error {
		set := func(flag string, apply func()) {
			if c[flag] {
				apply()
			}
		}
		set("name", func() { b.Name = f.Name })
		set("date", func() { b.Date = f.Date })
		set("mass-g", func() { b.MassG = f.MassG })
		set("height-mm", func() { b.HeightMM = f.HeightMM })
		set("base-mm", func() { b.BaseMM = f.BaseMM })
		set("top-mm", func() { b.TopMM = f.TopMM })
		set("bracing", func() { b.Bracing = f.Bracing })
		set("member", func() { b.Members = members })
		set("glue", func() { b.Glue = f.Glue })
		set("notes", func() { b.Notes = f.Notes })
		set("tag", func() { b.Tags = f.Tags })
		b.Tags = append(b.Tags, opts.AddTags...)
		if len(opts.RemoveTags) > 0 {
			drop := map[string]bool{}
			for _, t := range opts.RemoveTags {
				drop[strings.TrimSpace(t)] = true
			}
			kept := []string{}
			for _, t := range b.Tags {
				if !drop[t] {
					kept = append(kept, t)
				}
			}
			b.Tags = kept
		}
		return nil
	})
	if err != nil {
		return err
	}
	fmt.Fprintf(opts.IO.ErrOut, "Changed build %s\n", b.ID)
	return nil
}

// ---- remove

// buildRemoveOptions are the settings of `failframe build remove`.
type buildRemoveOptions struct {
	IO *IOStreams
	G  *buildGlobal

	ID  string
	Yes bool
}

func newBuildRemoveCmd(io *IOStreams, g *buildGlobal, runF func(*buildRemoveOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildRemoveRun
	}
	opts := &buildRemoveOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "remove ID [--yes]",
		Short: "Delete a build and its tests",
		Long: `Remove deletes a build record and its tests after asking. Without a terminal
to ask on, --yes is required. Evidence files stay in the object store (other
tests may share them); "failframe build check" counts those no test uses.` + exitHelp,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ID = args[0]
			if !opts.Yes && !io.InIsTerminal {
				return &FlagError{Err: errors.New("remove asks for confirmation, but input is not a terminal: add --yes to remove without asking")}
			}
			return runF(opts)
		},
	}
	cmd.Flags().BoolVarP(&opts.Yes, "yes", "y", false, "remove without asking")
	return cmd
}

func buildRemoveRun(opts *buildRemoveOptions) error {
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	b, err := s.Get(opts.ID)
	if err != nil {
		return err
	}
	if !opts.Yes {
		ts, err := s.Tests(opts.ID)
		if err != nil {
			return err
		}
		fmt.Fprintf(opts.IO.ErrOut, "Remove build %s (%s) and its %d test(s)? [y/N] ", b.ID, b.Name, len(ts))
		line, _ := bufio.NewReader(opts.IO.In).ReadString('\n')
		switch strings.ToLower(strings.TrimSpace(line)) {
		case "y", "yes":
		default:
			return errCancelled
		}
	}
	n, err := s.Remove(opts.ID)
	if err != nil {
		return err
	}
	fmt.Fprintf(opts.IO.ErrOut, "Removed build %s and %d test(s)\n", opts.ID, n)
	return nil
}

// ---- attach

// buildAttachOptions are the settings of `failframe build attach`.
type buildAttachOptions struct {
	IO *IOStreams
	G  *buildGlobal

	ID        string
	ReportDir string
}

func newBuildAttachCmd(io *IOStreams, g *buildGlobal, runF func(*buildAttachOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildAttachRun
	}
	opts := &buildAttachOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "attach ID REPORT_DIR",
		Short: "Attach an analysis report to a build as a test",
		Long: `Attach stores the result of a "failframe analyze" report folder (peak load,
efficiency, first member, failure mode, account, load alignment) as a test of
the build, and copies every file of the folder into the object store with its
SHA-256. Attaching the same report again changes nothing; a different report
becomes the build's next test.` + exitHelp,
		Example: `  failframe build attach T7 demo-out/report`,
		Args:    exactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ID, opts.ReportDir = args[0], args[1]
			return runF(opts)
		},
	}
	return cmd
}

func buildAttachRun(opts *buildAttachOptions) error {
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	res, err := s.Attach(opts.ID, opts.ReportDir)
	if err != nil {
		return err
	}
	for _, w := range res.Warnings {
		fmt.Fprintf(opts.IO.ErrOut, "warning: %s\n", w)
	}
	t := res.Test
	if !res.Created {
		fmt.Fprintf(opts.IO.ErrOut, "Already attached: %s is test %d of build %s; nothing changed\n", opts.ReportDir, t.Seq, t.BuildID)
		return nil
	}
	fmt.Fprintf(opts.IO.ErrOut, "Attached %s to build %s as test %d (%d files; peak load %s, efficiency %s, %s)\n",
		opts.ReportDir, t.BuildID, t.Seq, len(t.Files), optUnit(t.PeakLoadG, 0, " g"), optUnit(t.Efficiency, 1, ""), orNone(t.FailureMode))
	return nil
}

// ---- compare

// buildCompareOptions are the settings of `failframe build compare`.
type buildCompareOptions struct {
	IO *IOStreams
	G  *buildGlobal

	IDs   []string
	Tag   string
	Out   string
	Title string
}

func newBuildCompareCmd(io *IOStreams, g *buildGlobal, runF func(*buildCompareOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildCompareRun
	}
	opts := &buildCompareOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "compare [ID... | --tag TAG] [--out DIR]",
		Short: "Compare builds by efficiency, load and failure mode",
		Long: `Compare prints a table with one line per test: mass, peak load, efficiency
(peak load / mass, both in grams), failure mode and first member. Give build
IDs, or --tag, or nothing for all builds. With --out, it also writes
DIR/compare.html: the table and plots of efficiency by build, efficiency
against mass and failure modes by bracing pattern, in one file with the
images inside.` + exitHelp,
		Example: `  failframe build compare --tag spring --out season-2026
  failframe build compare T5 T6 T7`,
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.IDs = args
			if len(args) > 0 && opts.Tag != "" {
				return &FlagError{Err: errors.New("give build IDs or --tag, not both")}
			}
			return runF(opts)
		},
	}
	cmd.Flags().StringVar(&opts.Tag, "tag", "", "compare the builds with this tag")
	cmd.Flags().StringVar(&opts.Out, "out", "", "folder for compare.html (default: print the table only)")
	cmd.Flags().StringVar(&opts.Title, "title", "", "page title (default: from the tag or IDs)")
	return cmd
}

func buildCompareRun(opts *buildCompareOptions) error {
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	rows, err := s.Compare(opts.IDs, opts.Tag)
	if err != nil {
		return err
	}
	if len(rows) == 0 {
		if opts.Tag != "" {
			return &InputError{Err: fmt.Errorf("no build has the tag %q", opts.Tag)}
		}
		return &InputError{Err: fmt.Errorf("no builds recorded in %s", s.Path())}
	}
	if err := records.WriteCompareTable(opts.IO.Out, rows); err != nil {
		return err
	}
	if opts.Out == "" {
		return nil
	}
	title := opts.Title
	switch {
	case title != "":
	case opts.Tag != "":
		title = "Builds tagged " + opts.Tag
	case len(opts.IDs) > 0:
		title = "Builds " + strings.Join(opts.IDs, ", ")
	default:
		title = "All builds"
	}
	p, err := records.WriteComparePage(opts.Out, rows, title)
	if err != nil {
		return err
	}
	fmt.Fprintf(opts.IO.ErrOut, "Wrote %s\n", p)
	return nil
}

// ---- export

// buildExportOptions are the settings of `failframe build export`.
type buildExportOptions struct {
	IO *IOStreams
	G  *buildGlobal

	ID  string
	Out string
}

func newBuildExportCmd(io *IOStreams, g *buildGlobal, runF func(*buildExportOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildExportRun
	}
	opts := &buildExportOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "export ID --out FILE.zip",
		Short: "Write a build, its reports and evidence to one zip archive",
		Long: `Export writes one zip archive holding the build record and its tests
(failframe-build.json) and every attached report folder as tests/N/...,
so the archive can be read without failframe and taken back into another
store with "failframe build import".` + exitHelp,
		Example: `  failframe build export T7 --out T7.zip`,
		Args:    exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ID = args[0]
			if opts.Out == "" {
				return &FlagError{Err: errors.New("--out FILE.zip is required")}
			}
			return runF(opts)
		},
	}
	cmd.Flags().StringVar(&opts.Out, "out", "", "archive to write (replaced only when the export succeeds)")
	return cmd
}

func buildExportRun(opts *buildExportOptions) error {
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	if err := s.ExportFile(opts.ID, opts.Out); err != nil {
		return err
	}
	fmt.Fprintf(opts.IO.ErrOut, "Exported build %s to %s\n", opts.ID, opts.Out)
	return nil
}

// ---- import

// buildImportOptions are the settings of `failframe build import`.
type buildImportOptions struct {
	IO *IOStreams
	G  *buildGlobal

	File string
}

func newBuildImportCmd(io *IOStreams, g *buildGlobal, runF func(*buildImportOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildImportRun
	}
	opts := &buildImportOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "import FILE.zip",
		Short: "Take a build archive into this store",
		Long: `Import reads an archive written by "failframe build export" and records the
same build, tests and files in this store, checking every file's SHA-256.
A build ID already in the store is refused.` + exitHelp,
		Args: exactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.File = args[0]
			return runF(opts)
		},
	}
	return cmd
}

func buildImportRun(opts *buildImportOptions) error {
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	b, err := s.Import(opts.File)
	if err != nil {
		return err
	}
	fmt.Fprintf(opts.IO.ErrOut, "Imported build %s (%s) into %s\n", b.ID, b.Name, s.Path())
	return nil
}

// ---- check

// buildCheckOptions are the settings of `failframe build check`.
type buildCheckOptions struct {
	IO *IOStreams
	G  *buildGlobal

	// Prune removes objects no test uses (older than records.PruneGrace).
	Prune bool
}

func newBuildCheckCmd(io *IOStreams, g *buildGlobal, runF func(*buildCheckOptions) error) *cobra.Command {
	if runF == nil {
		runF = buildCheckRun
	}
	opts := &buildCheckOptions{IO: io, G: g}
	cmd := &cobra.Command{
		Use:   "check",
		Short: "Verify the database and the SHA-256 of every evidence file",
		Long: `Check runs SQLite's integrity and foreign-key checks and re-hashes every
evidence file in the object store, listing missing and corrupt files. It
exits with status 3 when it finds a problem.

Removed builds leave their evidence files in the object store; --prune
deletes the files no test uses (only those older than an hour, so an attach
running at the same time is safe).` + exitHelp,
		Args: exactArgs(0),
		RunE: func(cmd *cobra.Command, args []string) error { return runF(opts) },
	}
	cmd.Flags().BoolVar(&opts.Prune, "prune", false, "delete evidence files no test uses")
	return cmd
}

func buildCheckRun(opts *buildCheckOptions) error {
	s, err := opts.G.open()
	if err != nil {
		return err
	}
	defer s.Close()
	rep, err := s.Check()
	if rep != nil {
		w := opts.IO.Out
		fmt.Fprintf(w, "%s: %d builds, %d tests, %d files in %d objects (%d not used by any test)\n",
			s.Path(), rep.Builds, rep.Tests, rep.Files, rep.Objects, rep.Unreferenced)
		for _, p := range rep.Problems {
			fmt.Fprintln(w, p)
		}
		if len(rep.Problems) == 0 {
			fmt.Fprintln(w, "ok")
		}
	}
	if err != nil || !opts.Prune {
		return err
	}
	n, size, err := s.Prune(records.PruneGrace)
	if err != nil {
		return err
	}
	fmt.Fprintf(opts.IO.ErrOut, "Pruned %d unused file(s), %d bytes\n", n, size)
	return nil
}
