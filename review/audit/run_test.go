package audit

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"dosecover/review"
)

func readCSV(t *testing.T, p string) [][]string {
	t.Helper()
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", p, err)
	}
	return recs
}

// TestRunEveryCase audits 12 cases, one of them failing, one incomplete and
// one panicking, and checks the table, the records, the errors file and the
// exit code.
func TestRunEveryCase(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 12)
	writeFiles(t, in, map[string][]byte{
		"case-003/FAIL":       []byte("x"),
		"case-005/INCOMPLETE": []byte("x"),
		"case-007/PANIC":      []byte("x"),
	})
	out := filepath.Join(tmp, "out")
	fc := newFileCounter()
	cols := []Column{{"threshold", "240"}, {"margin_mm", "5"}}
	sum, err := Run(context.Background(), Config{
		Inputs: []string{in}, OutDir: out, Workers: 3, Analyzer: fc.analyze,
		Settings: json.RawMessage(`{"threshold": 240, "margin_mm": 5}`), SettingsColumns: cols,
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(sum.Rows) != 12 || sum.Analysed != 9 || sum.Failed != 2 || sum.Incomplete != 1 {
		t.Fatalf("rows %d analysed %d failed %d incomplete %d; want 12 9 2 1", len(sum.Rows), sum.Analysed, sum.Failed, sum.Incomplete)
	}
	if sum.ExitCode() != 1 {
		t.Errorf("ExitCode = %d with failed cases, want 1", sum.ExitCode())
	}
	if fc.total() != 12 {
		t.Errorf("analyzer called %d times for 12 cases", fc.total())
	}
	if got := fc.maxSeen.Load(); got > 3 {
		t.Errorf("%d cases in flight with 3 workers", got)
	}

	rows := readCSV(t, filepath.Join(out, "summary.csv"))
	if !equal(rows[0], Header(cols)) {
		t.Errorf("header %v", rows[0])
	}
	if len(rows) != 13 {
		t.Fatalf("summary.csv has %d lines, want 13", len(rows))
	}
	col := map[string]int{}
	for k, h := range rows[0] {
		col[h] = k
	}
	for _, r := range rows[1:] {
		k, _ := strconv.Atoi(strings.TrimPrefix(r[col["source"]], "in/case-"))
		switch k {
		case 3, 7:
			if r[col["status"]] != "failed" || r[col["reason"]] == "" {
				t.Errorf("case %d: %v", k, r)
			}
		case 5:
			if r[col["status"]] != "incomplete" || r[col["reason"]] != "no thermometry series" {
				t.Errorf("case %d: %v", k, r)
			}
		default:
			// The fake analysis reports 10 % per file; case k has 1+k%3 files.
			want := strconv.Itoa(10 * (1 + k%3))
			if r[col["status"]] != "ok" || r[col["coverage_pct"]] != want || r[col["coverage_p05_pct"]] != "" {
				t.Errorf("case %d: status %s coverage %q p05 %q; want ok %s and empty", k, r[col["status"]], r[col["coverage_pct"]], r[col["coverage_p05_pct"]], want)
			}
			if r[col["threshold"]] != "240" || r[col["margin_mm"]] != "5" || len(r[col["input_sha256"]]) != 64 {
				t.Errorf("case %d: settings/hash cells %v", k, r)
			}
		}
		if r[col["case"]] != "in__case-"+r[col["source"]][len("in/case-"):] {
			t.Errorf("case id %q for source %q", r[col["case"]], r[col["source"]])
		}
	}
	errs := readCSV(t, filepath.Join(out, "errors.csv"))
	if len(errs) != 4 {
		t.Errorf("errors.csv: %v", errs)
	}
	if !strings.Contains(errs[3][3], "internal error") || strings.Contains(errs[3][3], "\n") {
		t.Errorf("panic reason %q", errs[3][3])
	}

	// Records: one per case; the ok ones with their artifact and analysis.
	rec, err := ReadRecord(filepath.Join(out, "cases", "in__case-004", RecordFile))
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range sum.Rows {
		if r.Case == "in__case-004" && (len(r.Artifacts) != 1 || r.Artifacts[0] != "report.txt" || r.Dir != filepath.Join(out, "cases", "in__case-004")) {
			t.Errorf("row of case 4: artifacts %v in %s", r.Artifacts, r.Dir)
		}
	}
	if rec.Status != StatusOK || rec.Files != 2 || rec.Artifacts[0] != "report.txt" || rec.Source != "in/case-004" {
		t.Errorf("record %+v", rec)
	}
	b, _ := os.ReadFile(filepath.Join(out, "cases", "in__case-004", "report.txt"))
	if string(b) != "img0.dcm\nimg1.dcm" {
		t.Errorf("artifact %q", b)
	}
	raw, _ := os.ReadFile(filepath.Join(out, "cases", "in__case-004", RecordFile))
	var generic map[string]any
	if err := json.Unmarshal(raw, &generic); err != nil {
		t.Fatal(err)
	}
	if generic["analysis"].(map[string]any)["files"].(float64) != 2 {
		t.Errorf("analysis not stored: %v", generic["analysis"])
	}
	if generic["metrics"].(map[string]any)["coverage_p05_pct"] != nil {
		t.Errorf("NaN metric not written as null")
	}
	if tf := tempFiles(t, out); len(tf) != 0 {
		t.Errorf("temporary files left: %v", tf)
	}
	// Inputs untouched: no file was added to the input folders.
	cases, _, _ := Discover([]string{in})
	n := 0
	for _, c := range cases {
		n += len(c.Files)
	}
	if n != 4*1+4*2+4*3+3 { // 4x1 + 4x2 + 4x3 image files, 3 marker files
		t.Errorf("input folders now hold %d files, want %d", n, 4*1+4*2+4*3+3)
	}
}

func equal(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	for k := range a {
		if a[k] != b[k] {
			return false
		}
	}
	return true
}

// TestRunParallel proves that cases are analysed at the same time: each
// call waits until all workers are busy, which only happens when they run
// in parallel (a serial pool would wait out every timeout and fail).
func TestRunParallel(t *testing.T) {
	for _, workers := range []int{2, 4} {
		tmp := t.TempDir()
		in := makeCases(t, filepath.Join(tmp, "in"), 8)
		fc := newFileCounter()
		fc.hold = func(ctx context.Context, _ int32) {
			deadline := time.Now().Add(5 * time.Second)
			for fc.maxSeen.Load() < int32(workers) && time.Now().Before(deadline) {
				time.Sleep(time.Millisecond)
			}
		}
		sum, err := Run(context.Background(), Config{Inputs: []string{in}, OutDir: filepath.Join(tmp, "out"), Workers: workers, Analyzer: fc.analyze})
		if err != nil {
			t.Fatal(err)
		}
		if got := fc.maxSeen.Load(); got != int32(workers) {
			t.Errorf("workers %d: at most %d cases in flight, want exactly %d", workers, got, workers)
		}
		if sum.Analysed != 8 || sum.ExitCode() != 0 {
			t.Errorf("workers %d: analysed %d, exit %d", workers, sum.Analysed, sum.ExitCode())
		}
	}
}

// TestResumeAfterInterrupt simulates a killed audit: the context is
// cancelled after four cases, the run is resumed and must analyse only the
// cases that had not finished.
func TestResumeAfterInterrupt(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 10)
	out := filepath.Join(tmp, "out")
	settings := json.RawMessage(`{"threshold":240}`)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	first := newFileCounter()
	var progress []Progress
	cfg := Config{Inputs: []string{in}, OutDir: out, Workers: 2, Analyzer: first.analyze, Settings: settings,
		Progress: func(p Progress) {
			progress = append(progress, p)
			if p.Done == 4 {
				cancel()
			}
		}}
	sum, err := Run(ctx, cfg)
	if !errors.Is(err, context.Canceled) || !sum.Interrupted || sum.ExitCode() != 1 {
		t.Fatalf("interrupted run: err %v interrupted %v exit %d", err, sum.Interrupted, sum.ExitCode())
	}
	done := map[string]bool{}
	for _, r := range sum.Rows {
		done[r.Case] = true
	}
	if len(done) < 4 || len(done) >= 10 {
		t.Fatalf("%d cases finished before the interrupt", len(done))
	}
	if _, err := os.Stat(filepath.Join(out, "summary.csv")); !os.IsNotExist(err) {
		t.Errorf("an interrupted run wrote summary.csv (%v)", err)
	}
	if tf := tempFiles(t, out); len(tf) != 0 {
		t.Errorf("temporary files left: %v", tf)
	}
	// A killed run may leave a temporary file; the next run removes it.
	writeFiles(t, out, map[string][]byte{"cases/in__case-009/" + tempPrefix + "case.json.123.tmp": []byte(`{"cas`)})

	// A shard running at the same time into the same folder may be writing
	// a temporary file: a sharded run leaves recent ones alone.
	recent := filepath.Join(out, "cases", "in__case-008", tempPrefix+"report.txt.456.tmp")
	writeFiles(t, out, map[string][]byte{"cases/in__case-008/" + tempPrefix + "report.txt.456.tmp": []byte("partial")})
	if err := removeTemps(out, staleTemp); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(recent); err != nil {
		t.Errorf("a recent temporary file was removed by a sharded run: %v", err)
	}
	long := time.Now().Add(-2 * staleTemp)
	os.Chtimes(recent, long, long)
	if err := removeTemps(out, staleTemp); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(recent); !os.IsNotExist(err) {
		t.Errorf("a stale temporary file was kept: %v", err)
	}

	second := newFileCounter()
	cfg.Analyzer, cfg.Progress, cfg.Resume = second.analyze, nil, true
	sum, err = Run(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	if second.total() != 10-len(done) {
		t.Errorf("resume analysed %d cases, want %d", second.total(), 10-len(done))
	}
	for _, r := range sum.Rows {
		if done[r.Case] != r.Resumed {
			t.Errorf("case %s: finished before %v, resumed %v", r.Case, done[r.Case], r.Resumed)
		}
	}
	if sum.Analysed != 10 || sum.Resumed != len(done) || sum.ExitCode() != 0 {
		t.Errorf("analysed %d resumed %d exit %d", sum.Analysed, sum.Resumed, sum.ExitCode())
	}
	if len(readCSV(t, filepath.Join(out, "summary.csv"))) != 11 {
		t.Errorf("summary.csv does not list all 10 cases")
	}
	if tf := tempFiles(t, out); len(tf) != 0 {
		t.Errorf("temporary files left: %v", tf)
	}

	// Resume again after changing one case's file: only that case is redone.
	writeFiles(t, in, map[string][]byte{"case-002/img0.dcm": fakeDICOM("changed")})
	third := newFileCounter()
	cfg.Analyzer = third.analyze
	if _, err := Run(context.Background(), cfg); err != nil {
		t.Fatal(err)
	}
	if third.total() != 1 || third.calls[filepath.Join(in, "case-002")] != 1 {
		t.Errorf("after changing case-002, resume analysed %v", third.calls)
	}

	// Other settings: everything is redone.
	fourth := newFileCounter()
	cfg.Analyzer, cfg.Settings = fourth.analyze, json.RawMessage(`{"threshold":100}`)
	if _, err := Run(context.Background(), cfg); err != nil {
		t.Fatal(err)
	}
	if fourth.total() != 10 {
		t.Errorf("with new settings resume analysed %d of 10", fourth.total())
	}

	// Same settings written differently (key order, spaces) count as equal.
	fifth := newFileCounter()
	cfg.Analyzer, cfg.Settings = fifth.analyze, json.RawMessage("{ \"threshold\" : 100 }")
	if _, err := Run(context.Background(), cfg); err != nil {
		t.Fatal(err)
	}
	if fifth.total() != 0 {
		t.Errorf("equal settings in another layout: %d cases redone", fifth.total())
	}

	// A record made by another version of dosecover is not reused.
	recPath := filepath.Join(out, "cases", "in__case-003", RecordFile)
	b, _ := os.ReadFile(recPath)
	old := strings.Replace(string(b), `"dosecover_version": "`, `"dosecover_version": "0.0.9-`, 1)
	if old == string(b) {
		t.Fatal("no version in the record")
	}
	writeFiles(t, out, map[string][]byte{"cases/in__case-003/" + RecordFile: []byte(old)})
	seventh := newFileCounter()
	cfg.Analyzer = seventh.analyze
	if _, err := Run(context.Background(), cfg); err != nil {
		t.Fatal(err)
	}
	if seventh.total() != 1 || seventh.calls[filepath.Join(in, "case-003")] != 1 {
		t.Errorf("record of another version: resume analysed %v", seventh.calls)
	}

	// A deleted artifact makes its case count as unfinished.
	os.Remove(filepath.Join(out, "cases", "in__case-001", "report.txt"))
	sixth := newFileCounter()
	cfg.Analyzer = sixth.analyze
	if _, err := Run(context.Background(), cfg); err != nil {
		t.Fatal(err)
	}
	if sixth.total() != 1 {
		t.Errorf("after deleting an artifact, resume analysed %d cases, want 1", sixth.total())
	}
}

// TestResumeRetriesFailed: a failed case is tried again on resume, an
// incomplete one is not (its inputs decide, and they have not changed).
func TestResumeRetriesFailed(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 3)
	writeFiles(t, in, map[string][]byte{"case-000/FAIL": nil, "case-001/INCOMPLETE": nil})
	cfg := Config{Inputs: []string{in}, OutDir: filepath.Join(tmp, "out"), Workers: 1, Resume: true}
	for run, want := range []int{3, 1} {
		fc := newFileCounter()
		cfg.Analyzer = fc.analyze
		sum, err := Run(context.Background(), cfg)
		if err != nil {
			t.Fatal(err)
		}
		if fc.total() != want || sum.Failed != 1 || sum.Incomplete != 1 {
			t.Errorf("run %d: %d calls (want %d), failed %d, incomplete %d", run, fc.total(), want, sum.Failed, sum.Incomplete)
		}
	}
}

func TestRunUsageErrors(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 2)
	fc := newFileCounter()
	if err := os.Symlink(in, filepath.Join(tmp, "link")); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		cfg  Config
	}{
		{"output inside input", Config{Inputs: []string{in}, OutDir: filepath.Join(in, "case-000", "audit"), Analyzer: fc.analyze}},
		{"output is input", Config{Inputs: []string{in}, OutDir: in, Analyzer: fc.analyze}},
		{"output inside input by a link", Config{Inputs: []string{in}, OutDir: filepath.Join(tmp, "link", "out"), Analyzer: fc.analyze}},
		{"no inputs", Config{OutDir: filepath.Join(tmp, "out"), Analyzer: fc.analyze}},
		{"no output", Config{Inputs: []string{in}, Analyzer: fc.analyze}},
		{"no analyzer", Config{Inputs: []string{in}, OutDir: filepath.Join(tmp, "out")}},
		{"negative workers", Config{Inputs: []string{in}, OutDir: filepath.Join(tmp, "out"), Workers: -1, Analyzer: fc.analyze}},
		{"bad shard", Config{Inputs: []string{in}, OutDir: filepath.Join(tmp, "out"), Shard: Shard{5, 4}, Analyzer: fc.analyze}},
		{"bad settings", Config{Inputs: []string{in}, OutDir: filepath.Join(tmp, "out"), Settings: json.RawMessage("{"), Analyzer: fc.analyze}},
	} {
		_, err := Run(context.Background(), c.cfg)
		var ue *UsageError
		if !errors.As(err, &ue) {
			t.Errorf("%s: err %v, want a UsageError", c.name, err)
		}
	}
	if fc.total() != 0 {
		t.Errorf("analyzer ran %d times despite usage errors", fc.total())
	}
	if _, err := os.Stat(filepath.Join(in, "case-000", "audit")); !os.IsNotExist(err) {
		t.Errorf("an output folder was created inside the input")
	}
	// An input folder that is missing or is a file: a failure naming the
	// folder, not a usage error, and nothing written.
	plain := filepath.Join(tmp, "plain.txt")
	writeFiles(t, tmp, map[string][]byte{"plain.txt": []byte("not a folder")})
	for _, c := range []struct{ input, says string }{
		{filepath.Join(tmp, "nope"), "does not exist"},
		{plain, "not a folder"},
	} {
		out := filepath.Join(tmp, "out-missing")
		sum, err := Run(context.Background(), Config{Inputs: []string{in, c.input}, OutDir: out, Analyzer: fc.analyze})
		var ue *UsageError
		if err == nil || errors.As(err, &ue) || sum != nil {
			t.Errorf("input %s: summary %v, err %v; want a failure that is not a usage error", c.input, sum, err)
		} else if !strings.Contains(err.Error(), c.input) || !strings.Contains(err.Error(), c.says) {
			t.Errorf("input %s: message %q does not name the folder and say %q", c.input, err, c.says)
		}
		if _, err := os.Stat(out); !os.IsNotExist(err) {
			t.Errorf("input %s: the output folder was created", c.input)
		}
	}
	if fc.total() != 0 {
		t.Errorf("analyzer ran %d times although an input folder was missing", fc.total())
	}
	// No cases at all: a failure, not a usage error.
	empty := filepath.Join(tmp, "empty")
	writeFiles(t, empty, map[string][]byte{"x/notes.txt": []byte("no DICOM here")})
	_, err := Run(context.Background(), Config{Inputs: []string{empty}, OutDir: filepath.Join(tmp, "out2"), Analyzer: fc.analyze})
	var ue *UsageError
	if err == nil || errors.As(err, &ue) {
		t.Errorf("no cases: err %v", err)
	}
}

// TestShardRunsCoverAll runs every shard of 3 into one shared output folder
// and checks that the shard tables together list every case once.
func TestShardRunsCoverAll(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 15)
	out := filepath.Join(tmp, "out")
	var all []string
	for i := 1; i <= 3; i++ {
		fc := newFileCounter()
		sum, err := Run(context.Background(), Config{Inputs: []string{in}, OutDir: out, Shard: Shard{i, 3}, Workers: 2, Analyzer: fc.analyze})
		if err != nil {
			t.Fatal(err)
		}
		if fc.total() != len(sum.Rows) {
			t.Errorf("shard %d: %d calls for %d rows", i, fc.total(), len(sum.Rows))
		}
		rows := readCSV(t, filepath.Join(out, "summary-"+strconv.Itoa(i)+"-of-3.csv"))
		for _, r := range rows[1:] {
			all = append(all, r[0])
		}
	}
	sort.Strings(all)
	if len(all) != 15 {
		t.Fatalf("shards list %d cases, want 15: %v", len(all), all)
	}
	for k := 1; k < len(all); k++ {
		if all[k] == all[k-1] {
			t.Errorf("case %s in two shards", all[k])
		}
	}
}

func TestDeidentify(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "Doe_Jane"), 3)
	writeFiles(t, in, map[string][]byte{"case-001/FAIL": nil})
	out := filepath.Join(tmp, "out")
	var seen []Case
	var mu sync.Mutex
	fc := newFileCounter()
	analyze := func(ctx context.Context, c *Case) (*CaseResult, error) {
		mu.Lock()
		seen = append(seen, *c)
		mu.Unlock()
		return fc.analyze(ctx, c)
	}
	sum, err := Run(context.Background(), Config{Inputs: []string{in}, OutDir: out, Deidentify: true, Analyzer: analyze})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range seen {
		if !c.Deidentify || c.Name != "" || !strings.HasPrefix(c.ID, "case-") {
			t.Errorf("analyzer got %+v", c)
		}
	}
	for _, f := range append(sum.Files, filepath.Join(out, "cases", sum.Rows[0].Case, RecordFile), filepath.Join(out, "cases", sum.Rows[1].Case, RecordFile)) {
		if strings.HasSuffix(f, ".png") {
			continue
		}
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		if strings.Contains(string(b), "Doe_Jane") {
			t.Errorf("%s names the source folder:\n%s", f, b)
		}
	}
	for _, r := range sum.Rows {
		if len(r.Case) != len("case-")+12 || r.Source != "" {
			t.Errorf("row %+v", r)
		}
	}
}

func TestNumJSON(t *testing.T) {
	for _, c := range []struct {
		x    Num
		want string
	}{{1.5, "1.5"}, {0, "0"}, {Num(math.NaN()), "null"}, {Num(math.Inf(1)), "null"}, {-2e-7, "-2e-07"}} {
		b, err := json.Marshal(c.x)
		if err != nil || string(b) != c.want {
			t.Errorf("Marshal(%v) = %s, %v; want %s", c.x, b, err, c.want)
		}
		var back Num
		if err := json.Unmarshal(b, &back); err != nil {
			t.Fatal(err)
		}
		if !(back == c.x || math.IsNaN(float64(back)) && (math.IsNaN(float64(c.x)) || math.IsInf(float64(c.x), 0))) {
			t.Errorf("round trip %v -> %v", c.x, back)
		}
	}
}

func TestLoadRows(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 4)
	out := filepath.Join(tmp, "out")
	fc := newFileCounter()
	sum, err := Run(context.Background(), Config{Inputs: []string{in}, OutDir: out, Analyzer: fc.analyze})
	if err != nil {
		t.Fatal(err)
	}
	writeFiles(t, out, map[string][]byte{"cases/junk/case.json": []byte("not json")})
	rows, problems, err := LoadRows(out)
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 4 || len(problems) != 1 {
		t.Fatalf("LoadRows: %d rows, problems %v", len(rows), problems)
	}
	for k := range rows {
		a, b := rows[k], sum.Rows[k]
		if a.Case != b.Case || a.InputSHA256 != b.InputSHA256 || a.Metrics.CoveragePct != b.Metrics.CoveragePct || a.Dir != b.Dir {
			t.Errorf("row %d: loaded %+v, run gave %+v", k, a, b)
		}
	}
	if _, _, err := LoadRows(filepath.Join(tmp, "nope")); err == nil {
		t.Error("LoadRows on a missing folder: no error")
	}
}

// TestResumeKeepsDeidentification: a de-identified run never reuses a
// result made with identity, which would carry the source path, and never
// writes into a folder that holds identified records (nor the other way
// round): the folder would be passed on as de-identified. Its resume
// reuses its own de-identified records.
func TestResumeKeepsDeidentification(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "Doe_Jane"), 2)
	mixed, clean := filepath.Join(tmp, "out"), filepath.Join(tmp, "deid")
	runs := []struct {
		out      string
		deid     bool
		analysed int // -1: refused
	}{
		{mixed, false, 2},
		{mixed, true, -1}, // identified records there
		{clean, true, 2},
		{clean, true, 0}, // resumed
		{clean, false, -1},
	}
	for k, r := range runs {
		fc := newFileCounter()
		cfg := Config{Inputs: []string{in}, OutDir: r.out, Workers: 1, Resume: true, Analyzer: fc.analyze, Deidentify: r.deid}
		sum, err := Run(context.Background(), cfg)
		if r.analysed < 0 {
			var ic *IdentityConflictError
			if !errors.As(err, &ic) || fc.total() != 0 || !strings.Contains(err.Error(), r.out) {
				t.Errorf("run %d (deidentify %v into %s): err %v after %d analyses; want refused before any", k, r.deid, r.out, err, fc.total())
			}
			continue
		}
		if err != nil {
			t.Fatalf("run %d: %v", k, err)
		}
		if fc.total() != r.analysed {
			t.Errorf("run %d (deidentify %v): %d cases analysed, want %d", k, r.deid, fc.total(), r.analysed)
		}
		for _, row := range sum.Rows {
			if r.deid && (row.Source != "" || strings.Contains(row.Case, "Doe")) {
				t.Errorf("run %d: de-identified row %+v", k, row)
			}
		}
	}
	// Nothing in the de-identified folder names the source.
	filepath.WalkDir(clean, func(p string, d fs.DirEntry, err error) error {
		if err == nil && strings.Contains(p, "Doe") {
			t.Errorf("de-identified output holds %s", p)
		}
		if err == nil && d.Type().IsRegular() {
			if b, _ := os.ReadFile(p); strings.Contains(string(b), "Doe_Jane") {
				t.Errorf("de-identified output %s names the source folder", p)
			}
		}
		return nil
	})
}

// TestShardsShareSettings runs the two shards of one audit into one output
// folder, then a shard with other settings: the shards' results and one
// settings file stand side by side, and the shard with other settings is
// refused before it analyses anything.
func TestShardsShareSettings(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 8)
	out := filepath.Join(tmp, "out")
	settings := json.RawMessage(`{"threshold": 240, "margin_mm": 3, "cem43": {"break": 43}}`)
	want, _ := CanonicalSettings(settings)
	wantHash, _ := SettingsHash(settings)
	cfg := func(i int, s json.RawMessage, fc *fileCounter) Config {
		return Config{Inputs: []string{in}, OutDir: out, Shard: Shard{i, 2}, Workers: 2, Settings: s, Analyzer: fc.analyze, Resume: true}
	}
	seen := map[string]bool{}
	for i := 1; i <= 2; i++ {
		fc := newFileCounter()
		sum, err := Run(context.Background(), cfg(i, settings, fc))
		if err != nil {
			t.Fatalf("shard %d/2: %v", i, err)
		}
		if len(sum.Rows) == 0 || fc.total() != len(sum.Rows) {
			t.Fatalf("shard %d/2: %d rows, %d analyses; want every case of the shard analysed", i, len(sum.Rows), fc.total())
		}
		for _, r := range sum.Rows {
			seen[r.Case] = true
		}
	}
	if len(seen) != 8 {
		t.Fatalf("the two shards analysed %d distinct cases, want 8", len(seen))
	}
	// Every case's record is still there, made with the audit's settings,
	// and settings.json holds those settings.
	rows, problems, err := LoadRows(out)
	if err != nil || len(problems) > 0 || len(rows) != 8 {
		t.Fatalf("records after both shards: %d rows, problems %v, err %v", len(rows), problems, err)
	}
	for _, r := range rows {
		if r.SettingsHash != wantHash || !seen[r.Case] {
			t.Errorf("record of %s: settings hash %s, want %s", r.Case, r.SettingsHash, wantHash)
		}
	}
	stored := filepath.Join(out, SettingsFile)
	readStored := func() []byte { return readFile(t, stored) }
	before := readStored()
	if got, _ := CanonicalSettings(before); string(got) != string(want) {
		t.Errorf("settings.json holds %s, want %s", before, want)
	}

	// The same shard again with --resume: taken from the first run.
	fc := newFileCounter()
	sum, err := Run(context.Background(), cfg(1, json.RawMessage(`{ "cem43": {"break": 43}, "margin_mm": 3, "threshold": 240 }`), fc))
	if err != nil || fc.total() != 0 || sum.Resumed != len(sum.Rows) {
		t.Errorf("resuming shard 1/2 with the same settings (other key order): err %v, %d analyses, %d of %d resumed", err, fc.total(), sum.Resumed, len(sum.Rows))
	}

	// Shard 2 with another threshold: refused, nothing analysed or changed.
	records := map[string][]byte{}
	recs, _ := filepath.Glob(filepath.Join(out, "cases", "*", RecordFile))
	for _, p := range recs {
		records[p] = readFile(t, p)
	}
	fc = newFileCounter()
	sum, err = Run(context.Background(), cfg(2, json.RawMessage(`{"threshold": 300, "margin_mm": 3, "cem43": {"break": 43}}`), fc))
	var ce *SettingsConflictError
	if !errors.As(err, &ce) || sum != nil {
		t.Fatalf("shard with other settings: summary %v, err %v; want a SettingsConflictError", sum, err)
	}
	for _, says := range []string{out, "threshold: 240 in settings.json, 300 for this shard", "(--settings)"} {
		if !strings.Contains(err.Error(), says) {
			t.Errorf("message %q does not say %q", err, says)
		}
	}
	if len(ce.Differences) != 1 {
		t.Errorf("differences %q, want only the threshold", ce.Differences)
	}
	if fc.total() != 0 {
		t.Errorf("the refused shard analysed %d cases", fc.total())
	}
	if got := readStored(); string(got) != string(before) {
		t.Errorf("settings.json changed by the refused shard: %s", got)
	}
	for p, b := range records {
		if string(readFile(t, p)) != string(b) {
			t.Errorf("%s changed by the refused shard", p)
		}
	}
	// A nested setting that differs is named by its path.
	_, err = Run(context.Background(), cfg(2, json.RawMessage(`{"threshold": 240, "margin_mm": 3, "cem43": {"break": 44}}`), newFileCounter()))
	if err == nil || !strings.Contains(err.Error(), "cem43.break: 43 in settings.json, 44 for this shard") {
		t.Errorf("nested difference: %v", err)
	}
}

// startTogether runs the two shards cfg(0) and cfg(1) at the same moment
// into an empty folder, five times: each time exactly one must run and the
// other be refused with an error for which refused is true.
func startTogether(t *testing.T, cfg func(i int, out string) Config, refused func(error) bool) {
	t.Helper()
	tmp := t.TempDir()
	for round := range 5 {
		out := filepath.Join(tmp, fmt.Sprintf("out%d", round))
		errs := make([]error, 2)
		var wg sync.WaitGroup
		for i := range 2 {
			wg.Add(1)
			go func() {
				defer wg.Done()
				_, errs[i] = Run(context.Background(), cfg(i, out))
			}()
		}
		wg.Wait()
		ran, no := 0, 0
		for _, err := range errs {
			switch {
			case err == nil:
				ran++
			case refused(err):
				no++
			default:
				t.Errorf("round %d: %v", round, err)
			}
		}
		if ran != 1 || no != 1 {
			t.Errorf("round %d: %d shards ran and %d were refused, want 1 and 1 (errors %v)", round, ran, no, errs)
		}
		if left := tempFiles(t, out); len(left) > 0 {
			t.Errorf("round %d: temporary files left: %v", round, left)
		}
	}
}

// TestShardsStartTogether starts two shards with different settings at
// the same moment into an empty output folder: exactly one runs and the
// other is refused, whatever the order in which they reach the folder.
func TestShardsStartTogether(t *testing.T) {
	in := makeCases(t, filepath.Join(t.TempDir(), "in"), 6)
	startTogether(t, func(i int, out string) Config {
		s := json.RawMessage(fmt.Sprintf(`{"threshold": %d}`, 240+60*i))
		return Config{Inputs: []string{in}, OutDir: out, Shard: Shard{i + 1, 2}, Workers: 1, Settings: s, Analyzer: newFileCounter().analyze}
	}, func(err error) bool {
		var ce *SettingsConflictError
		return errors.As(err, &ce)
	})
}

// TestShardsIdentityStartTogether starts two shards of the same settings,
// one de-identified, at the same moment into an empty output folder:
// exactly one runs, the other is refused (identified and de-identified
// records never share a folder).
func TestShardsIdentityStartTogether(t *testing.T) {
	in := makeCases(t, filepath.Join(t.TempDir(), "in"), 6)
	startTogether(t, func(i int, out string) Config {
		return Config{Inputs: []string{in}, OutDir: out, Shard: Shard{i + 1, 2}, Workers: 1, Deidentify: i == 1, Analyzer: newFileCounter().analyze}
	}, func(err error) bool {
		var ic *IdentityConflictError
		return errors.As(err, &ic)
	})
}

// TestShardBadSettingsFile: a settings.json that is not JSON stops a shard
// with a message naming it.
func TestShardBadSettingsFile(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 2)
	out := filepath.Join(tmp, "out")
	writeFiles(t, out, map[string][]byte{SettingsFile: []byte(`{"threshold": `)})
	_, err := Run(context.Background(), Config{Inputs: []string{in}, OutDir: out, Shard: Shard{1, 2}, Analyzer: newFileCounter().analyze})
	if err == nil || !strings.Contains(err.Error(), filepath.Join(out, SettingsFile)) {
		t.Errorf("damaged settings.json: %v", err)
	}
}

func readFile(t *testing.T, p string) []byte {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestBadIdentityFile: an identity.json that is not JSON stops the run
// with a message naming it, before anything is analysed.
func TestBadIdentityFile(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 2)
	out := filepath.Join(tmp, "out")
	if err := os.MkdirAll(out, 0o755); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(out, IdentityFile), []byte("{"), 0o644)
	fc := newFileCounter()
	_, err := Run(context.Background(), Config{Inputs: []string{in}, OutDir: out, Workers: 1, Analyzer: fc.analyze})
	if err == nil || !strings.Contains(err.Error(), IdentityFile) || !strings.Contains(err.Error(), out) || fc.total() != 0 {
		t.Errorf("err %v after %d analyses; want a refusal naming %s in %s", err, fc.total(), IdentityFile, out)
	}
}

// TestResumeRedoesOldResultLayout: on resume, a finished case whose record
// holds an analysis in an earlier result layout (schema_version below
// review.SchemaVersion) is analysed again, so that figures the layout
// now writes as null do not stay 0 in its record; a case whose analysis
// is in the current layout, and one holding no analysis, are taken over.
func TestResumeRedoesOldResultLayout(t *testing.T) {
	tmp := t.TempDir()
	in := makeCases(t, filepath.Join(tmp, "in"), 3)
	out := filepath.Join(tmp, "out")
	cfg := Config{Inputs: []string{in}, OutDir: out, Workers: 1, Resume: true}
	fc := newFileCounter()
	cfg.Analyzer = fc.analyze
	if _, err := Run(context.Background(), cfg); err != nil {
		t.Fatal(err)
	}
	recs, err := filepath.Glob(filepath.Join(out, "cases", "*", RecordFile))
	if err != nil || len(recs) != 3 {
		t.Fatalf("%d records (%v), want 3", len(recs), err)
	}
	sort.Strings(recs)
	// Record 0 in the layout before, record 1 in the current one, record
	// 2 left without an analysis.
	for n, schema := range []int{review.SchemaVersion - 1, review.SchemaVersion} {
		b, err := os.ReadFile(recs[n])
		if err != nil {
			t.Fatal(err)
		}
		var m map[string]json.RawMessage
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatal(err)
		}
		m["analysis"] = json.RawMessage(fmt.Sprintf(`{"schema_version": %d}`, schema))
		if b, err = json.Marshal(m); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(recs[n], b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	fc = newFileCounter()
	cfg.Analyzer = fc.analyze
	sum, err := Run(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	if fc.total() != 1 || sum.Resumed != 2 {
		t.Errorf("resume analysed %d cases and took over %d, want 1 and 2", fc.total(), sum.Resumed)
	}
	// The case of the old layout was analysed again (this analyzer writes
	// no analysis), the one of the current layout taken over as it was.
	for n, want := range []int{0, review.SchemaVersion, 0} {
		rec, err := ReadRecord(recs[n])
		if err != nil {
			t.Fatal(err)
		}
		if rec.analysisSchema != want {
			t.Errorf("record %d after resume: analysis schema %d, want %d", n, rec.analysisSchema, want)
		}
	}
}
