package records

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"
)

// The test binary doubles as a child writer process: with
// FAILFRAME_RECORDS_CHILD set, TestMain runs the named role instead of the
// tests. This lets tests kill a real writer mid-transaction and run two
// writer processes against one store.
const childEnv = "FAILFRAME_RECORDS_CHILD"

func TestMain(m *testing.M) {
	if role := os.Getenv(childEnv); role != "" {
		if err := runChild(role, os.Getenv("FAILFRAME_RECORDS_DB"), os.Getenv("FAILFRAME_RECORDS_ARG")); err != nil {
			fmt.Fprintln(os.Stderr, "child:", err)
			os.Exit(1)
		}
		os.Exit(0)
	}
	os.Exit(m.Run())
}

func runChild(role, db, arg string) error {
	s, err := Open(db)
	if err != nil {
		return err
	}
	defer s.Close()
	switch role {
	case "hang-in-transaction":
		// Begin one big transaction, say so, and keep writing until killed.
		tx, err := s.db.BeginTx(context.Background(), nil)
		if err != nil {
			return err
		}
		pad := strings.Repeat("n", 2000)
		for i := 0; ; i++ {
			if _, err := tx.Exec(`INSERT INTO builds(id, name, date, mass_g, bracing, notes, created_at, updated_at)
				VALUES (?, 'doomed', '2026-01-01', 10, 'x', ?, 'x', 'x')`, fmt.Sprintf("K%06d", i), pad); err != nil {
				return err
			}
			if _, err := tx.Exec(`UPDATE builds SET notes = 'overwritten by a dying writer' WHERE id = 'KEEP'`); err != nil {
				return err
			}
			if i == 3000 {
				fmt.Println("IN-TRANSACTION")
				os.Stdout.Sync()
			}
			if i > 3000 {
				time.Sleep(time.Millisecond)
			}
		}
	case "writer":
		// Add builds with the given prefix, edit each, attach one report.
		for i := 0; i < 20; i++ {
			b := sampleBuild(fmt.Sprintf("%s%02d", arg, i))
			if _, err := s.Add(b); err != nil {
				return err
			}
			if _, err := s.Edit(b.ID, func(b *Build) error { b.Notes = "edited by " + arg; return nil }); err != nil {
				return err
			}
		}
		_, err := s.Attach(arg+"00", os.Getenv("FAILFRAME_RECORDS_REPORT"))
		return err
	}
	return fmt.Errorf("unknown role %q", role)
}

// child starts the test binary in a child role.
func child(t *testing.T, role, db, arg string, extraEnv ...string) *exec.Cmd {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), childEnv+"="+role, "FAILFRAME_RECORDS_DB="+db, "FAILFRAME_RECORDS_ARG="+arg)
	cmd.Env = append(cmd.Env, extraEnv...)
	return cmd
}

func TestWriterKilledMidTransaction(t *testing.T) {
	db := filepath.Join(t.TempDir(), "builds.db")
	s, err := Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	keep := sampleBuild("KEEP")
	if _, err := s.Add(keep); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Attach("KEEP", fakeReport(t, t.TempDir(), 1, 9000, "brace_buckling", "AB-d1")); err != nil {
		t.Fatal(err)
	}
	want, _ := s.Get("KEEP")

	cmd := child(t, "hang-in-transaction", db, "")
	cmd.Stderr = os.Stderr
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	line, err := bufio.NewReader(out).ReadString('\n')
	if err != nil || !strings.Contains(line, "IN-TRANSACTION") {
		cmd.Process.Kill()
		cmd.Wait()
		t.Fatalf("child did not reach its transaction: %q, %v", line, err)
	}
	// The uncommitted transaction has spilled pages to the WAL by now.
	if err := cmd.Process.Kill(); err != nil { // SIGKILL: no chance to roll back
		t.Fatal(err)
	}
	cmd.Wait()
	// The dying transaction had spilled pages into the write-ahead log, so
	// recovery really has uncommitted frames to ignore.
	if fi, err := os.Stat(db + "-wal"); err != nil || fi.Size() < 1<<20 {
		t.Errorf("write-ahead log after the kill: %v, %v; want more than 1 MiB of uncommitted frames", fi, err)
	}

	// This process's open store and a fresh one both see the state before
	// the dying transaction, and take writes again.
	for i, st := range []*Store{s, func() *Store {
		s2, err := Open(db)
		if err != nil {
			t.Fatal(err)
		}
		return s2
	}()} {
		if n := countRows(t, st, "builds"); n != 1+i { // KEEP, plus AFTER0 once store 0 wrote it
			t.Errorf("store %d: %d builds after the kill, want %d", i, n, 1+i)
		}
		got, err := st.Get("KEEP")
		if err != nil || got.Notes != want.Notes {
			t.Errorf("store %d: KEEP = %+v, %v", i, got, err)
		}
		if rep, err := st.Check(); err != nil {
			t.Errorf("store %d: check after kill: %+v, %v", i, rep, err)
		}
		if _, err := st.Add(sampleBuild(fmt.Sprintf("AFTER%d", i))); err != nil {
			t.Errorf("store %d: write after kill: %v", i, err)
		}
		if i == 1 {
			st.Close()
		}
	}
}

func TestConcurrentWritersGoroutines(t *testing.T) {
	db := filepath.Join(t.TempDir(), "builds.db")
	const workers, each = 6, 10
	var wg sync.WaitGroup
	errs := make(chan error, workers*each*2+4)
	// Each goroutine opens its own Store (its own connection pool), as
	// separate commands would.
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			s, err := Open(db)
			if err != nil {
				errs <- err
				return
			}
			defer s.Close()
			for i := 0; i < each; i++ {
				id := fmt.Sprintf("G%d-%02d", w, i)
				if _, err := s.Add(sampleBuild(id)); err != nil {
					errs <- err
					continue
				}
				if _, err := s.Edit(id, func(b *Build) error { b.MassG += float64(w); return nil }); err != nil {
					errs <- err
				}
			}
		}(w)
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	s, err := Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if n := countRows(t, s, "builds"); n != workers*each {
		t.Errorf("%d builds, want %d", n, workers*each)
	}
	if n := countRows(t, s, "members"); n != workers*each*3 {
		t.Errorf("%d member rows, want %d", n, workers*each*3)
	}
	b, _ := s.Get("G5-03")
	if b == nil || b.MassG != 21.4+5 {
		t.Errorf("G5-03 = %+v", b)
	}
	// Two different reports attached to one build at once get tests 1 and 2.
	dirs := []string{fakeReport(t, t.TempDir(), 1, 9000, "brace_buckling", "AB-d1"), fakeReport(t, t.TempDir(), 2, 8000, "tower_twist", "")}
	var wg2 sync.WaitGroup
	for _, d := range dirs {
		wg2.Add(1)
		go func(d string) {
			defer wg2.Done()
			if _, err := s.Attach("G0-00", d); err != nil {
				t.Error(err)
			}
		}(d)
	}
	wg2.Wait()
	ts, _ := s.Tests("G0-00")
	if len(ts) != 2 || ts[0].Seq != 1 || ts[1].Seq != 2 {
		t.Errorf("tests %+v", ts)
	}
	if _, err := s.Check(); err != nil {
		t.Error(err)
	}
}

func TestConcurrentWritersTwoProcesses(t *testing.T) {
	db := filepath.Join(t.TempDir(), "builds.db")
	var cmds []*exec.Cmd
	var outs []*strings.Builder
	for i, prefix := range []string{"PA", "PB"} {
		rep := fakeReport(t, t.TempDir(), uint8(20+i), 9000, "brace_buckling", "AB-d1")
		cmd := child(t, "writer", db, prefix, "FAILFRAME_RECORDS_REPORT="+rep)
		var buf strings.Builder
		cmd.Stdout, cmd.Stderr = &buf, &buf
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		cmds, outs = append(cmds, cmd), append(outs, &buf)
	}
	for i, cmd := range cmds {
		if err := cmd.Wait(); err != nil {
			t.Errorf("writer %d: %v\n%s", i, err, outs[i])
		}
	}
	s, err := Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if n := countRows(t, s, "builds"); n != 40 {
		t.Errorf("%d builds, want 40", n)
	}
	for _, prefix := range []string{"PA", "PB"} {
		for i := 0; i < 20; i++ {
			b, err := s.Get(prefix + fmt.Sprintf("%02d", i))
			if err != nil || b.Notes != "edited by "+prefix {
				t.Errorf("%s%02d: %+v, %v", prefix, i, b, err)
			}
		}
		if ts, _ := s.Tests(prefix + "00"); len(ts) != 1 {
			t.Errorf("%s00 has %d tests", prefix, len(ts))
		}
	}
	rep, err := s.Check()
	if err != nil || rep.Tests != 2 {
		t.Errorf("check: %+v, %v", rep, err)
	}
	var ic string
	s.db.QueryRow("PRAGMA integrity_check").Scan(&ic)
	if ic != "ok" {
		t.Errorf("integrity_check: %s", ic)
	}
}

func TestWriterGivesUpWithClearErrorWhenLockHeld(t *testing.T) {
	old := busyTimeout
	busyTimeout = 300 * time.Millisecond
	defer func() { busyTimeout = old }()
	db := filepath.Join(t.TempDir(), "builds.db")
	a, err := Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer a.Close()
	b, err := Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	tx, err := a.db.BeginTx(context.Background(), nil) // holds the write lock
	if err != nil {
		t.Fatal(err)
	}
	start := time.Now()
	_, err = b.Add(sampleBuild("T1"))
	waited := time.Since(start)
	if !errors.Is(err, ErrBusy) {
		t.Errorf("Add while another writer holds the lock: %v, want ErrBusy", err)
	}
	if waited < 250*time.Millisecond {
		t.Errorf("gave up after %v, before the busy timeout", waited)
	}
	tx.Rollback()
	if _, err := b.Add(sampleBuild("T1")); err != nil {
		t.Errorf("after the lock is released: %v", err)
	}
}
