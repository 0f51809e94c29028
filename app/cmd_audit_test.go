//go:build cgo

package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"dosecover/review"
	"dosecover/review/audit"
)

// fakeAuditCase writes a case folder with one file that starts like a DICOM
// Part 10 file (128-byte preamble, "DICM"; PS3.10 7.1).
func fakeAuditCase(t *testing.T, dir string, extra ...string) {
	t.Helper()
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	b := append(make([]byte, 128), "DICM"...)
	if err := os.WriteFile(filepath.Join(dir, "IM1"), b, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, e := range extra {
		os.WriteFile(filepath.Join(dir, e), nil, 0o644)
	}
}

// withFakeAuditAnalysis replaces the analysis by one that fails on a file
// named FAIL and otherwise reports one percent of coverage per file.
func withFakeAuditAnalysis(t *testing.T) {
	old := auditAnalysis
	t.Cleanup(func() { auditAnalysis = old })
	auditAnalysis = func(s review.Settings) (audit.Analyzer, []byte, []audit.Column, error) {
		settings := s.JSON()
		return func(ctx context.Context, c *audit.Case) (*audit.CaseResult, error) {
			for _, f := range c.Files {
				if f == "FAIL" {
					return nil, errors.New("marker file FAIL")
				}
			}
			m := audit.NoMetrics()
			m.CoveragePct = audit.Num(len(c.Files))
			return &audit.CaseResult{Metrics: m}, nil
		}, settings, nil, nil
	}
}

func TestAuditExitCodes(t *testing.T) {
	withFakeAuditAnalysis(t)
	tmp := t.TempDir()
	good := filepath.Join(tmp, "good")
	fakeAuditCase(t, filepath.Join(good, "a"))
	fakeAuditCase(t, filepath.Join(good, "b"))
	mixed := filepath.Join(tmp, "mixed")
	fakeAuditCase(t, filepath.Join(mixed, "a"))
	fakeAuditCase(t, filepath.Join(mixed, "bad"), "FAIL")
	out := filepath.Join(tmp, "out")
	for _, c := range []struct {
		name string
		args []string
		want int
	}{
		{"all analysed, options after the folder", []string{good, "-o", out + "1", "--workers", "2"}, 0},
		{"one case failed", []string{"--out", out + "2", mixed}, 1},
		{"help", []string{"-h"}, 0},
		{"no folder", []string{"-o", out}, 2},
		{"no output", []string{good}, 2},
		{"unknown option", []string{good, "-o", out, "--fast"}, 2},
		{"bad shard", []string{good, "-o", out, "--shard", "3/2"}, 2},
		{"bad workers", []string{good, "-o", out, "--workers", "-3"}, 2},
		{"output inside input", []string{good, "-o", filepath.Join(good, "a", "out")}, 2},
		{"missing input", []string{filepath.Join(tmp, "nope"), "-o", out}, 1},
		{"missing settings file", []string{good, "-o", out, "--settings", filepath.Join(tmp, "nope.json")}, 1},
	} {
		var stdout, stderr bytes.Buffer
		got := run(append([]string{"audit"}, c.args...), &stdout, &stderr)
		if got != c.want {
			t.Errorf("%s: exit %d, want %d\nstdout: %s\nstderr: %s", c.name, got, c.want, stdout.String(), stderr.String())
		}
		if c.want != 0 && stderr.Len() == 0 {
			t.Errorf("%s: exit %d without a message", c.name, c.want)
		}
	}
	if _, err := os.Stat(filepath.Join(good, "a", "out")); !os.IsNotExist(err) {
		t.Errorf("output folder created inside the input")
	}
	b, err := os.ReadFile(filepath.Join(out+"2", "errors.csv"))
	if err != nil || !strings.Contains(string(b), "marker file FAIL") {
		t.Errorf("errors.csv: %s %v", b, err)
	}
	// Not a terminal: plain progress lines, one per case.
	var stdout, stderr bytes.Buffer
	run([]string{"audit", good, "-o", out + "3"}, &stdout, &stderr)
	if strings.Count(stderr.String(), "audit: [") != 2 || strings.Contains(stderr.String(), "\r") {
		t.Errorf("progress on a pipe:\n%q", stderr.String())
	}
}

func TestParseArgs(t *testing.T) {
	for _, c := range []struct {
		args []string
		pos  []string
		out  string
	}{
		{[]string{"a", "b", "-o", "x"}, []string{"a", "b"}, "x"},
		{[]string{"-o", "x", "a"}, []string{"a"}, "x"},
		{[]string{"a", "-o", "x", "b"}, []string{"a", "b"}, "x"},
		{[]string{"-o", "x", "--", "-a", "b"}, []string{"-a", "b"}, "x"},
	} {
		fs := flag.NewFlagSet("t", flag.ContinueOnError)
		out := fs.String("o", "", "")
		pos, err := parseArgs(fs, c.args)
		if err != nil || !reflect.DeepEqual(pos, c.pos) || *out != c.out {
			t.Errorf("%v: %v %q %v; want %v %q", c.args, pos, *out, err, c.pos, c.out)
		}
	}
}

// TestAuditShardsShareOutput runs both shards of an audit into one output
// folder from the command line, then a shard with another settings file,
// which is refused with exit code 1 and a message naming the difference.
func TestAuditShardsShareOutput(t *testing.T) {
	withFakeAuditAnalysis(t)
	tmp := t.TempDir()
	reg := filepath.Join(tmp, "registry")
	for _, n := range []string{"a", "b", "c", "d", "e", "f"} {
		fakeAuditCase(t, filepath.Join(reg, n))
	}
	s240 := filepath.Join(tmp, "s240.json")
	s300 := filepath.Join(tmp, "s300.json")
	os.WriteFile(s240, []byte(`{"threshold": 240, "margin_mm": 3}`), 0o644)
	os.WriteFile(s300, []byte(`{"threshold": 300, "margin_mm": 3}`), 0o644)
	out := filepath.Join(tmp, "out")
	for _, shard := range []string{"1/2", "2/2"} {
		if code, stdout, stderr := runCmd("audit", reg, "-o", out, "--shard", shard, "--settings", s240); code != 0 {
			t.Fatalf("shard %s: exit %d\n%s\n%s", shard, code, stdout, stderr)
		}
	}
	rows, _, err := audit.LoadRows(out)
	if err != nil || len(rows) != 6 {
		t.Fatalf("after both shards: %d case records, %v; want 6", len(rows), err)
	}
	b, err := os.ReadFile(filepath.Join(out, "settings.json"))
	want, _ := review.LoadSettings(s240)
	if got, rerr := review.ReadSettings(bytes.NewReader(b), "settings.json", review.Settings{}); err != nil || rerr != nil || !got.Equal(want) {
		t.Errorf("settings.json %q, %v, %v; want the settings of both shards, every one of them", b, err, rerr)
	}
	code, _, stderr := runCmd("audit", reg, "-o", out, "--shard", "2/2", "--settings", s300, "--resume")
	if code != 1 {
		t.Errorf("shard with other settings: exit %d, want 1", code)
	}
	for _, says := range []string{out, "other settings", "threshold: 240 in settings.json, 300 for this shard"} {
		if !strings.Contains(stderr, says) {
			t.Errorf("message does not say %q:\n%s", says, stderr)
		}
	}
	if bad := rawMessage(stderr); len(bad) > 0 {
		t.Errorf("raw error text %q in:\n%s", bad, stderr)
	}
	if b2, _ := os.ReadFile(filepath.Join(out, "settings.json")); string(b2) != string(b) {
		t.Errorf("settings.json changed by the refused shard: %s", b2)
	}
}

// TestAuditKeepsIdentityApart: a de-identified audit into a folder that
// holds an identified one (and the other way round) exits 1 with a message
// naming the folder, and adds nothing to it.
func TestAuditKeepsIdentityApart(t *testing.T) {
	withFakeAuditAnalysis(t)
	tmp := t.TempDir()
	reg := filepath.Join(tmp, "registry")
	for _, n := range []string{"a", "b"} {
		fakeAuditCase(t, filepath.Join(reg, n))
	}
	for _, c := range []struct{ first, second []string }{
		{nil, []string{"--deidentify"}},
		{[]string{"--deidentify"}, nil},
	} {
		out := filepath.Join(t.TempDir(), "out")
		if code, stdout, stderr := runCmd(append([]string{"audit", reg, "-o", out}, c.first...)...); code != 0 {
			t.Fatalf("first audit %v: exit %d\n%s\n%s", c.first, code, stdout, stderr)
		}
		before, _ := filepath.Glob(filepath.Join(out, "cases", "*"))
		code, _, stderr := runCmd(append([]string{"audit", reg, "-o", out}, c.second...)...)
		if code != 1 {
			t.Errorf("second audit %v into the same folder: exit %d, want 1", c.second, code)
		}
		for _, says := range []string{out, "must not share it"} {
			if !strings.Contains(stderr, says) {
				t.Errorf("message does not say %q:\n%s", says, stderr)
			}
		}
		if after, _ := filepath.Glob(filepath.Join(out, "cases", "*")); len(after) != len(before) {
			t.Errorf("the refused audit changed the case folders: %v, was %v", after, before)
		}
	}
}

// TestAuditResumeNeedsSameThermometry: --resume reuses a case's record only
// when every setting is the same; a changed thermometry setting (drift
// correction in the settings file, or PRF α on the command line) reuses
// none.
func TestAuditResumeNeedsSameThermometry(t *testing.T) {
	withFakeAuditAnalysis(t)
	tmp := t.TempDir()
	reg := filepath.Join(tmp, "registry")
	for _, n := range []string{"a", "b", "c"} {
		fakeAuditCase(t, filepath.Join(reg, n))
	}
	poly := filepath.Join(tmp, "poly.json")
	none := filepath.Join(tmp, "none.json")
	os.WriteFile(poly, []byte(`{"thermometry": {"drift": "polynomial"}}`), 0o644)
	os.WriteFile(none, []byte(`{"thermometry": {"drift": "none"}}`), 0o644)
	out := filepath.Join(tmp, "out")
	if code, stdout, stderr := runCmd("audit", reg, "-o", out, "--settings", poly); code != 0 {
		t.Fatalf("first run: exit %d\n%s\n%s", code, stdout, stderr)
	}
	for _, c := range []struct {
		name    string
		args    []string
		resumed string
	}{
		{"same settings", []string{"--settings", poly}, "(3 from an earlier run)"},
		{"other drift correction", []string{"--settings", none}, "(0 from an earlier run)"},
		{"other PRF alpha", []string{"--settings", poly, "--alpha", "-0.0097"}, "(0 from an earlier run)"},
	} {
		o := filepath.Join(tmp, "out-"+strings.ReplaceAll(c.name, " ", "-"))
		if err := os.CopyFS(o, os.DirFS(out)); err != nil {
			t.Fatal(err)
		}
		code, stdout, stderr := runCmd(append([]string{"audit", reg, "-o", o, "--resume"}, c.args...)...)
		if code != 0 || !strings.Contains(stdout, c.resumed) {
			t.Errorf("%s: exit %d, want 0 and %q in\n%s\n%s", c.name, code, c.resumed, stdout, stderr)
		}
	}
}
