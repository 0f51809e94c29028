package audit

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap"
)

// mergeCases writes 14 fake cases below tmp/in, three of them broken (a
// failed, an incomplete and a panicking case), and returns the folder.
func mergeCases(t *testing.T, tmp string) string {
	in := makeCases(t, filepath.Join(tmp, "in"), 14)
	writeFiles(t, in, map[string][]byte{
		"case-002/FAIL":       nil,
		"case-005/INCOMPLETE": nil,
		"case-009/PANIC":      nil,
	})
	return in
}

var mergeSettings = json.RawMessage(`{"threshold": 240, "margin_mm": 3}`)
var mergeColumns = []Column{{"threshold", "240"}, {"margin_mm", "3"}}

func mergeConfig(in, out string, i, n int) Config {
	fc := newFileCounter()
	return Config{Inputs: []string{in}, OutDir: out, Shard: Shard{i, n}, Workers: 2,
		Settings: mergeSettings, SettingsColumns: mergeColumns, Analyzer: fc.analyze}
}

// runShards runs the shards only of n into out.
func runShards(t *testing.T, in, out string, n int, only ...int) {
	t.Helper()
	for _, i := range only {
		if _, err := Run(context.Background(), mergeConfig(in, out, i, n)); err != nil {
			t.Fatalf("shard %d/%d: %v", i, n, err)
		}
	}
}

// withoutTiming returns the CSV text of path without the columns that
// depend on the run rather than the case (seconds, resumed).
func withoutTiming(t *testing.T, path string) [][]string {
	t.Helper()
	rows := readCSV(t, path)
	drop := map[int]bool{}
	for k, h := range rows[0] {
		if h == "seconds" || h == "resumed" {
			drop[k] = true
		}
	}
	if len(drop) != 2 {
		t.Fatalf("%s: header %v lacks seconds or resumed", path, rows[0])
	}
	var out [][]string
	for _, r := range rows {
		var keep []string
		for k, c := range r {
			if !drop[k] {
				keep = append(keep, c)
			}
		}
		out = append(out, keep)
	}
	return out
}

// sameAsWholeRun checks that the summary files in merged equal those of
// the whole run in whole: summary.csv cell by cell (timing columns aside),
// errors.csv and summary.png byte for byte.
func sameAsWholeRun(t *testing.T, whole, merged string) {
	t.Helper()
	a, b := withoutTiming(t, filepath.Join(whole, "summary.csv")), withoutTiming(t, filepath.Join(merged, "summary.csv"))
	if len(a) != len(b) {
		t.Fatalf("merged summary.csv has %d lines, the whole run's %d", len(b), len(a))
	}
	for k := range a {
		if strings.Join(a[k], ",") != strings.Join(b[k], ",") {
			t.Errorf("summary.csv line %d:\n merged %q\n whole  %q", k+1, b[k], a[k])
		}
	}
	for _, name := range []string{"errors.csv", "summary.png"} {
		x, err1 := os.ReadFile(filepath.Join(whole, name))
		y, err2 := os.ReadFile(filepath.Join(merged, name))
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: %v %v", name, err1, err2)
		}
		if !bytes.Equal(x, y) {
			t.Errorf("merged %s differs from the whole run's (%d and %d bytes)", name, len(y), len(x))
		}
	}
}

// The reference for a merge is a whole run of the same cases: Merge must
// write what Run writes without shards.
func TestMergeEqualsWholeRun(t *testing.T) {
	tmp := t.TempDir()
	in := mergeCases(t, tmp)
	whole := filepath.Join(tmp, "whole")
	cfg := mergeConfig(in, whole, 0, 0)
	wsum, err := Run(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	if wsum.Failed != 2 || wsum.Incomplete != 1 {
		t.Fatalf("whole run: %d failed, %d incomplete; want the marker cases 2 and 1", wsum.Failed, wsum.Incomplete)
	}
	for _, n := range []int{1, 3} {
		t.Run(fmt.Sprintf("%d shards", n), func(t *testing.T) {
			out := filepath.Join(tmp, fmt.Sprintf("shards-%d", n))
			var idx []int
			for i := n; i >= 1; i-- { // any order
				idx = append(idx, i)
			}
			if n == 1 {
				// --shard 1/1 is a whole run: no state file, nothing to merge.
				runShards(t, in, out, 1, 1)
				if _, err := Merge(out); err == nil || !strings.Contains(err.Error(), "holds no shards") {
					t.Fatalf("merge of a whole run: %v; want a refusal naming no shards", err)
				}
				return
			}
			runShards(t, in, out, n, idx...)
			sum, err := Merge(out)
			if err != nil {
				t.Fatal(err)
			}
			if sum.ExitCode() != wsum.ExitCode() || sum.Failed != wsum.Failed || sum.Incomplete != wsum.Incomplete || sum.Analysed != wsum.Analysed {
				t.Errorf("merge: %d analysed, %d incomplete, %d failed, exit %d; whole run %d, %d, %d, exit %d",
					sum.Analysed, sum.Incomplete, sum.Failed, sum.ExitCode(), wsum.Analysed, wsum.Incomplete, wsum.Failed, wsum.ExitCode())
			}
			if len(sum.Files) != 3 {
				t.Errorf("merge wrote %v, want three files", sum.Files)
			}
			sameAsWholeRun(t, whole, out)
		})
	}
}

// Exit code as the audit's: 0 when every case of every shard was analysed.
func TestMergeExitCodeAllAnalysed(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 6)
	out := filepath.Join(tmp, "out")
	runShards(t, in, out, 2, 1, 2)
	sum, err := Merge(out)
	if err != nil || sum.ExitCode() != 0 || sum.Analysed != 6 {
		t.Fatalf("merge of clean shards: %v, %+v; want 6 analysed and exit code 0", err, sum)
	}
}

// De-identified shards merge to the de-identified whole run (pseudonyms,
// no source paths).
func TestMergeDeidentified(t *testing.T) {
	tmp := t.TempDir()
	in := mergeCases(t, tmp)
	whole, out := filepath.Join(tmp, "whole"), filepath.Join(tmp, "out")
	cfg := mergeConfig(in, whole, 0, 0)
	cfg.Deidentify = true
	if _, err := Run(context.Background(), cfg); err != nil {
		t.Fatal(err)
	}
	for i := 1; i <= 2; i++ {
		cfg := mergeConfig(in, out, i, 2)
		cfg.Deidentify = true
		if _, err := Run(context.Background(), cfg); err != nil {
			t.Fatal(err)
		}
	}
	for i := 1; i <= 2; i++ {
		b, err := os.ReadFile(filepath.Join(out, ShardStateFile(Shard{i, 2})))
		if err != nil || bytes.Contains(b, []byte("in/case-")) || bytes.Contains(b, []byte(tmp)) {
			t.Errorf("state of de-identified shard %d/2 names a source folder (or: %v)", i, err)
		}
	}
	sum, err := Merge(out)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range sum.Rows {
		if r.Source != "" || !strings.HasPrefix(r.Case, "case-") {
			t.Errorf("merged row %q has source %q; want a pseudonym and no source", r.Case, r.Source)
		}
	}
	sameAsWholeRun(t, whole, out)
}

// deadPID returns the id of a process that has ended.
func deadPID(t *testing.T) int {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	if err := cmd.Run(); err != nil {
		t.Fatal(err)
	}
	return cmd.Process.Pid
}

// editState rewrites shard i/n's state file in out through edit.
func editState(t *testing.T, out string, i, n int, edit func(st *ShardState)) {
	t.Helper()
	p := filepath.Join(out, ShardStateFile(Shard{i, n}))
	st, err := readShardState(p)
	if err != nil {
		t.Fatal(err)
	}
	edit(st)
	if err := st.write(out, Shard{i, n}); err != nil {
		t.Fatal(err)
	}
}

func TestMergeRefuses(t *testing.T) {
	tmp := t.TempDir()
	in := mergeCases(t, tmp)
	host, _ := os.Hostname()
	dead := deadPID(t)
	tests := []struct {
		name    string
		prepare func(t *testing.T, out string)
		want    []string // in the message
	}{
		{"missing shard", func(t *testing.T, out string) { runShards(t, in, out, 3, 1, 3) },
			[]string{"shard 2/3 is missing", "--shard 2/3"}},
		{"two missing", func(t *testing.T, out string) { runShards(t, in, out, 3, 2) },
			[]string{"shard 1/3 is missing", "shard 3/3 is missing"}},
		{"still running", func(t *testing.T, out string) {
			runShards(t, in, out, 3, 1, 2, 3)
			editState(t, out, 2, 3, func(st *ShardState) { st.State, st.PID, st.Host, st.Rows = ShardRunning, os.Getpid(), host, nil })
		}, []string{"shard 2/3 is still running", fmt.Sprintf("process %d on %s", os.Getpid(), host)}},
		{"killed", func(t *testing.T, out string) {
			runShards(t, in, out, 3, 1, 2, 3)
			editState(t, out, 3, 3, func(st *ShardState) { st.State, st.PID, st.Host, st.Rows = ShardRunning, dead, host, nil })
		}, []string{"shard 3/3 did not finish", fmt.Sprintf("process %d on %s", dead, host), "is gone", "--resume"}},
		{"running on another machine", func(t *testing.T, out string) {
			runShards(t, in, out, 3, 1, 2, 3)
			editState(t, out, 1, 3, func(st *ShardState) { st.State, st.Host, st.Rows = ShardRunning, "node-elsewhere", nil })
		}, []string{"shard 1/3 has not finished", "on node-elsewhere", "node lost", "--resume"}},
		{"other settings", func(t *testing.T, out string) {
			// A shard run elsewhere with other settings, its state file
			// copied into the audit folder (as when results are
			// gathered from machines without a shared folder).
			runShards(t, in, out, 3, 1, 3)
			other := filepath.Join(tmp, "other-settings")
			cfg := mergeConfig(in, other, 2, 3)
			cfg.Settings = json.RawMessage(`{"threshold": 300, "margin_mm": 3}`)
			if _, err := Run(context.Background(), cfg); err != nil {
				t.Fatal(err)
			}
			b, err := os.ReadFile(filepath.Join(other, "shard-2-of-3.json"))
			if err != nil {
				t.Fatal(err)
			}
			os.WriteFile(filepath.Join(out, "shard-2-of-3.json"), b, 0o644)
		}, []string{"shard 2/3 was made with other settings than settings.json", "threshold: 240 in settings.json, 300"}},
		{"other version", func(t *testing.T, out string) {
			runShards(t, in, out, 3, 1, 2, 3)
			editState(t, out, 3, 3, func(st *ShardState) { st.Version = "0.0.1-old" })
		}, []string{"shard 3/3 was made by dosecover 0.0.1-old, this is dosecover " + dosemap.Version}},
		{"other case list", func(t *testing.T, out string) {
			runShards(t, in, out, 3, 1, 2, 3)
			editState(t, out, 2, 3, func(st *ShardState) { st.CasesFound++; st.CaseListHash = "00" })
		}, []string{"shard 2/3 found 15 cases", "shard 1/3 found 14", "input folders changed"}},
		{"two splits", func(t *testing.T, out string) {
			runShards(t, in, out, 3, 1, 2, 3)
			runShards(t, in, out, 2, 1)
		}, []string{"shards of different splits", "1 of 2 (shard 1)", "3 of 3 (shard 1, 2, 3)"}},
	}
	for k, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			out := filepath.Join(tmp, fmt.Sprintf("out-%d", k))
			tc.prepare(t, out)
			sum, err := Merge(out)
			var me *MergeError
			if !errors.As(err, &me) || sum != nil {
				t.Fatalf("merge: summary %v, err %v; want a *MergeError", sum, err)
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("message lacks %q:\n%v", w, err)
				}
			}
			if !strings.Contains(err.Error(), out) {
				t.Errorf("message does not name the folder %s:\n%v", out, err)
			}
			for _, f := range []string{"summary.csv", "errors.csv", "summary.png"} {
				if _, err := os.Stat(filepath.Join(out, f)); err == nil {
					t.Errorf("a refused merge wrote %s", f)
				}
			}
		})
	}
	t.Run("no folder", func(t *testing.T) {
		missing := filepath.Join(tmp, "no-such-audit")
		if _, err := Merge(missing); err == nil || !strings.Contains(err.Error(), missing) {
			t.Errorf("merge of a missing folder: %v; want an error naming it", err)
		}
	})
}

// A shard interrupted half way is refused by the merge; run again alone with
// Resume it analyses only its cases without a result, and the merge then
// equals a whole run.
func TestMergeAfterShardRerun(t *testing.T) {
	tmp := t.TempDir()
	in := mergeCases(t, tmp)
	whole := filepath.Join(tmp, "whole")
	if _, err := Run(context.Background(), mergeConfig(in, whole, 0, 0)); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(tmp, "out")
	runShards(t, in, out, 2, 1)

	// Shard 2 stops after its first case analysed.
	ctx, cancel := context.WithCancel(context.Background())
	cfg := mergeConfig(in, out, 2, 2)
	cfg.Workers = 1
	all := len(Shard{2, 2}.Select(discoverAll(t, in)))
	if all < 3 {
		t.Fatalf("shard 2/2 holds %d cases; the test needs 3 or more", all)
	}
	cfg.Progress = func(p Progress) {
		if p.Last != nil && p.Last.Status == StatusOK {
			cancel()
		}
	}
	sum, err := Run(ctx, cfg)
	if !errors.Is(err, context.Canceled) || !sum.Interrupted {
		t.Fatalf("interrupted shard: %v", err)
	}
	_, err = Merge(out)
	if err == nil || !strings.Contains(err.Error(), "shard 2/2 was interrupted") {
		t.Fatalf("merge after an interrupted shard: %v; want a refusal naming shard 2/2", err)
	}
	// As if the machine had died instead: the state still says running.
	editState(t, out, 2, 2, func(st *ShardState) { st.State, st.PID = ShardRunning, deadPID(t) })
	if _, err = Merge(out); err == nil || !strings.Contains(err.Error(), "shard 2/2 did not finish") {
		t.Fatalf("merge after a killed shard: %v; want a refusal naming shard 2/2", err)
	}

	fc := newFileCounter()
	cfg = mergeConfig(in, out, 2, 2)
	cfg.Analyzer, cfg.Resume = fc.analyze, true
	sum, err = Run(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	// The cases finished before the interruption are taken over (failed
	// ones are tried again).
	if sum.Resumed < 1 || fc.total() != all-sum.Resumed {
		t.Errorf("rerun of shard 2/2: %d resumed, %d analysed of %d; want the finished case kept and the rest analysed", sum.Resumed, fc.total(), all)
	}
	msum, err := Merge(out)
	if err != nil {
		t.Fatal(err)
	}
	if msum.Resumed != sum.Resumed {
		t.Errorf("merged table: %d resumed rows, the rerun had %d", msum.Resumed, sum.Resumed)
	}
	sameAsWholeRun(t, whole, out)
}

func discoverAll(t *testing.T, in string) []Case {
	t.Helper()
	cases, _, err := Discover([]string{in})
	if err != nil {
		t.Fatal(err)
	}
	return cases
}

// TestWholeRunRemovesShardStates: a whole run into a folder where a split
// audit ran before removes the shards' state files (and nothing else), so
// a later merge refuses instead of writing the old shards' tables over the
// whole run's; a shard run keeps the other shards' state files.
func TestWholeRunRemovesShardStates(t *testing.T) {
	tmp := t.TempDir()
	in := mergeCases(t, tmp)
	out := filepath.Join(tmp, "out")
	runShards(t, in, out, 2, 1)
	runShards(t, in, out, 2, 2) // shard 2 alone in the folder keeps shard 1's state
	for _, s := range []string{"shard-1-of-2.json", "shard-2-of-2.json"} {
		if _, err := os.Stat(filepath.Join(out, s)); err != nil {
			t.Fatalf("after both shards: %v", err)
		}
	}
	writeFiles(t, out, map[string][]byte{"shard-notes.json": []byte("{}")})
	if _, err := Run(context.Background(), mergeConfig(in, out, 0, 0)); err != nil {
		t.Fatal(err)
	}
	ents, err := os.ReadDir(out)
	if err != nil {
		t.Fatal(err)
	}
	var left []string
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), "shard-") {
			left = append(left, e.Name())
		}
	}
	if len(left) != 1 || left[0] != "shard-notes.json" {
		t.Errorf("after a whole run the folder holds %v; want only shard-notes.json (not a state file)", left)
	}
	if _, err := Merge(out); err == nil || !strings.Contains(err.Error(), "holds no shards") {
		t.Errorf("merge after the whole run: %v; want a refusal naming no shards", err)
	}
}
