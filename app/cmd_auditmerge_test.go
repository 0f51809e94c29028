//go:build cgo

package main

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"dosecover/dosemap/sim"
	"dosecover/review/audit"
)

// The reference of every merge test is a whole audit of the same simulated
// cases on one machine, run once per test binary.
var (
	mergeRefOnce  sync.Once
	mergeRefIn    string // the registry: reg/case-001 ...
	mergeRefWhole string // the whole audit's output folder
	mergeRefErr   string
	mergeRefRoot  string // removed by TestMain
)

// mergeCaseCount simulated cases (sim.WriteCases, seed 7): small, so that
// the tests stay well under a minute on two shared cores; both shards of
// two hold at least one of them (checked). A further case holds a damaged
// DICOM file, so every audit of the registry lists one failed case.
const mergeCaseCount = 4

// mergeCounts tells whether out (an audit's or a merge's standard output)
// counts the cases of the registry: all analysed but the damaged one.
func mergeCounts(out string) bool {
	return strings.Contains(out, fmt.Sprintf("%d cases: %d analysed (", mergeCaseCount+1, mergeCaseCount)) &&
		strings.Contains(out, "run), 0 incomplete, 1 failed")
}

// auditReference returns the simulated registry and the output folder of
// its whole audit (default settings; exit code 1 for the failed case).
func auditReference(t *testing.T) (in, whole string) {
	t.Helper()
	if testing.Short() {
		t.Skip("simulates and audits several cases; skipped with -short")
	}
	mergeRefOnce.Do(func() {
		root, err := os.MkdirTemp("", "dosecover-merge-")
		if err != nil {
			mergeRefErr = err.Error()
			return
		}
		mergeRefRoot = root
		os.Chmod(root, 0o755) // Slurm tasks and munged read below it
		in := filepath.Join(root, "reg")
		if _, err := sim.WriteCases(in, mergeCaseCount, 7); err != nil {
			mergeRefErr = err.Error()
			return
		}
		// A file that is DICOM by its preamble but holds no data elements.
		broken := filepath.Join(in, "case-broken")
		if err := os.Mkdir(broken, 0o755); err != nil {
			mergeRefErr = err.Error()
			return
		}
		if err := os.WriteFile(filepath.Join(broken, "IM1.dcm"), append(make([]byte, 128), "DICM\x02\x00"...), 0o644); err != nil {
			mergeRefErr = err.Error()
			return
		}
		for i := 1; i <= 2; i++ {
			n := 0
			for k := 1; k <= mergeCaseCount; k++ {
				if (audit.Shard{Index: i, Count: 2}).Contains(fmt.Sprintf("reg/case-%03d", k)) {
					n++
				}
			}
			if n == 0 {
				mergeRefErr = fmt.Sprintf("shard %d/2 of the simulated cases is empty; choose another seed", i)
				return
			}
		}
		whole := filepath.Join(root, "whole")
		var so, se bytes.Buffer
		if code := run([]string{"audit", in, "-o", whole, "--workers", "2"}, &so, &se); code != 1 || !mergeCounts(so.String()) {
			mergeRefErr = fmt.Sprintf("whole audit: exit %d, %s%s; want 1 and one failed case", code, so.String(), se.String())
			return
		}
		mergeRefIn, mergeRefWhole = in, whole
	})
	if mergeRefErr != "" {
		t.Fatal(mergeRefErr)
	}
	return mergeRefIn, mergeRefWhole
}

// commandDir returns a folder holding "dosecover": a link to this test
// binary, which TestMain turns into the command under that name.
func commandDir(t *testing.T) string {
	t.Helper()
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "bin")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(exe, filepath.Join(dir, "dosecover")); err != nil {
		t.Fatal(err)
	}
	return dir
}

// readTable reads a CSV file without the columns that describe the run
// rather than the case (seconds, resumed).
func readTable(t *testing.T, path string) [][]string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(bytes.NewReader(b)).ReadAll()
	if err != nil || len(rows) == 0 {
		t.Fatalf("%s: %v", path, err)
	}
	var keep []int
	for k, h := range rows[0] {
		if h != "seconds" && h != "resumed" {
			keep = append(keep, k)
		}
	}
	if len(keep) != len(rows[0])-2 {
		t.Fatalf("%s: header %v lacks seconds or resumed", path, rows[0])
	}
	out := make([][]string, len(rows))
	for r, row := range rows {
		for _, k := range keep {
			out[r] = append(out[r], row[k])
		}
	}
	return out
}

// sameSummaries checks the merged summary files against the whole audit's:
// summary.csv cell by cell (timing columns aside), errors.csv and
// summary.png byte for byte.
func sameSummaries(t *testing.T, whole, merged string) {
	t.Helper()
	a, b := readTable(t, filepath.Join(whole, "summary.csv")), readTable(t, filepath.Join(merged, "summary.csv"))
	if len(a) != mergeCaseCount+2 || len(b) != len(a) {
		t.Fatalf("summary.csv: merged %d lines, whole audit %d; want %d", len(b), len(a), mergeCaseCount+2)
	}
	for k := range a {
		if strings.Join(a[k], ",") != strings.Join(b[k], ",") {
			t.Errorf("summary.csv line %d:\n merged %q\n whole  %q", k+1, b[k], a[k])
		}
	}
	for _, f := range []string{"errors.csv", "summary.png"} {
		x, err1 := os.ReadFile(filepath.Join(whole, f))
		y, err2 := os.ReadFile(filepath.Join(merged, f))
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: %v, %v", f, err1, err2)
		}
		if !bytes.Equal(x, y) {
			t.Errorf("merged %s differs from the whole audit's", f)
		}
	}
}

// waitForFile waits until path holds want.
func waitForFile(t *testing.T, path, want string, limit time.Duration) {
	t.Helper()
	end := time.Now().Add(limit)
	for time.Now().Before(end) {
		if b, err := os.ReadFile(path); err == nil && strings.Contains(string(b), want) {
			return
		}
		time.Sleep(20 * time.Millisecond)
	}
	t.Fatalf("%s does not hold %q after %v", path, want, limit)
}

// A shard process stopped (as on a busy node), then killed: the merge
// names it as running, then as gone; run again alone with --resume, the
// merge equals the whole audit.
func TestAuditMergeAfterKilledShard(t *testing.T) {
	in, whole := auditReference(t)
	out := filepath.Join(t.TempDir(), "out")
	var so, se bytes.Buffer
	if code := run([]string{"audit", in, "-o", out, "--shard", "1/2", "--workers", "2"}, &so, &se); code > 1 {
		t.Fatalf("shard 1/2: exit %d: %s", code, se.String())
	}
	merge := func() (int, string, string) {
		var so, se bytes.Buffer
		code := run([]string{"audit", "merge", out}, &so, &se)
		return code, so.String(), se.String()
	}
	code, _, msg := merge()
	if code != 1 || !strings.Contains(msg, "shard 2/2 is missing") {
		t.Fatalf("merge without shard 2: exit %d, %q; want 1 naming the missing shard", code, msg)
	}

	cmd := exec.Command(filepath.Join(commandDir(t), "dosecover"), "audit", in, "-o", out, "--shard", "2/2", "--workers", "1")
	cmd.Stdout, cmd.Stderr = &so, &se
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	waitForFile(t, filepath.Join(out, "shard-2-of-2.json"), `"state": "running"`, time.Minute)
	cmd.Process.Signal(syscall.SIGSTOP)
	code, _, msg = merge()
	if code != 1 || !strings.Contains(msg, "shard 2/2 is still running") {
		t.Errorf("merge while shard 2 runs: exit %d, %q; want 1 naming the running shard", code, msg)
	}
	cmd.Process.Kill()
	cmd.Wait()
	code, _, msg = merge()
	for _, want := range []string{"shard 2/2 did not finish", "is gone", "--resume", "nothing was written"} {
		if code != 1 || !strings.Contains(msg, want) {
			t.Errorf("merge after shard 2 was killed: exit %d, %q; want 1 and %q", code, msg, want)
		}
	}
	if _, err := os.Stat(filepath.Join(out, "summary.csv")); err == nil {
		t.Error("a refused merge wrote summary.csv")
	}

	se.Reset()
	if code := run([]string{"audit", in, "-o", out, "--shard", "2/2", "--workers", "2", "--resume"}, &so, &se); code > 1 {
		t.Fatalf("shard 2/2 run again: exit %d: %s", code, se.String())
	}
	code, stdout, msg := merge()
	if code != 1 || !mergeCounts(stdout) {
		t.Fatalf("merge after the rerun: exit %d, %q, %q", code, stdout, msg)
	}
	sameSummaries(t, whole, out)
}

func TestAuditMergeUsage(t *testing.T) {
	for _, tc := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"audit", "merge"}, 2, "want one output folder"},
		{[]string{"audit", "merge", "a", "b"}, 2, "want one output folder"},
		{[]string{"audit", "merge", "--bad", "a"}, 2, "flag provided but not defined"},
		{[]string{"audit", "merge", "-h"}, 0, "usage: dosecover audit merge OUT_DIR"},
		{[]string{"audit", "merge", filepath.Join(t.TempDir(), "none")}, 1, "none: does not exist"},
		{[]string{"audit", "merge", t.TempDir()}, 1, "holds no shards"},
	} {
		var so, se bytes.Buffer
		code := run(tc.args, &so, &se)
		if code != tc.code || !strings.Contains(so.String()+se.String(), tc.want) {
			t.Errorf("%v: exit %d, %q %q; want %d and %q", tc.args, code, so.String(), se.String(), tc.code, tc.want)
		}
	}
}

// README's loop over machines with ssh, run as written with an ssh that
// runs the command here (as a remote shell would: the words joined by
// spaces), four "machines" over the simulated registry: the merge at its
// end must equal the whole audit.
func TestAuditSSHLoopInREADME(t *testing.T) {
	in, whole := auditReference(t)
	readme, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	_, after, ok := strings.Cut(string(readme), "**With ssh instead of a scheduler.**")
	if !ok {
		t.Fatal("README has no paragraph **With ssh instead of a scheduler.**")
	}
	var script []string
	for _, line := range strings.Split(after, "\n") {
		code, isCode := strings.CutPrefix(line, "    ")
		if !isCode && len(script) > 0 {
			break // the end of the first code block
		}
		if isCode {
			script = append(script, code)
		}
	}
	if len(script) == 0 {
		t.Fatal("README's ssh paragraph has no code block")
	}
	out := filepath.Join(t.TempDir(), "audit")
	text := strings.NewReplacer("/data/registry", in, "/shared/audit-2026", out).Replace(strings.Join(script, "\n"))
	if !strings.Contains(text, in) || !strings.Contains(text, "audit merge "+out) {
		t.Fatalf("README's ssh loop does not use /data/registry and /shared/audit-2026 as expected:\n%s", text)
	}
	bin := commandDir(t)
	if err := os.WriteFile(filepath.Join(bin, "ssh"), []byte("#!/bin/sh\nshift\nexec sh -c \"$*\"\n"), 0o755); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command("bash", "-euo", "pipefail", "-c", text)
	cmd.Dir = t.TempDir()
	cmd.Env = append(os.Environ(), "PATH="+bin+string(os.PathListSeparator)+os.Getenv("PATH"))
	said, err := cmd.CombinedOutput()
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.ExitCode() != 1 || !mergeCounts(string(said)) {
		t.Fatalf("README's ssh loop: %v; want the merge's exit code 1 for the damaged case\n%s", err, said)
	}
	for i := 1; i <= 4; i++ {
		if _, err := os.Stat(filepath.Join(out, fmt.Sprintf("shard-%d-of-4.json", i))); err != nil {
			t.Errorf("shard %d/4: %v", i, err)
		}
	}
	sameSummaries(t, whole, out)
}
