//go:build cgo

package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestExitCodes drives every subcommand through run with command lines a
// user can get wrong and checks the exit code (0 done, 1 failure
// explained, 2 usage error), that a failure or usage error prints a
// message naming what is wrong, and that nothing was written where it was
// refused.
func TestExitCodes(t *testing.T) {
	good := smallCase(t)
	tmp := t.TempDir()
	file := filepath.Join(tmp, "plain.txt")
	if err := os.WriteFile(file, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	missing := filepath.Join(tmp, "absent")
	out := func(name string) string { return filepath.Join(tmp, "out", name) }
	if err := os.MkdirAll(out(""), 0o755); err != nil {
		t.Fatal(err)
	}
	badSettings := filepath.Join(tmp, "bad-settings.json")
	if err := os.WriteFile(badSettings, []byte(`{"treshold": 300}`), 0o644); err != nil {
		t.Fatal(err)
	}
	nonEmpty := filepath.Join(tmp, "nonempty")
	if err := os.MkdirAll(nonEmpty, 0o755); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(nonEmpty, "keep.txt"), []byte("x"), 0o644)
	for _, c := range []struct {
		name string
		args []string
		code int
		says string // a fragment the messages must hold ("" for success)
	}{
		// Help is not an error.
		{"help", []string{"help"}, 0, ""},
		{"inspect -h", []string{"inspect", "-h"}, 0, ""},
		{"analyze --help", []string{"analyze", "--help"}, 0, ""},
		{"report -h", []string{"report", "-h"}, 0, ""},
		{"deidentify -h", []string{"deidentify", "-h"}, 0, ""},
		{"demo -h", []string{"demo", "-h"}, 0, ""},
		{"unknown command", []string{"frobnicate"}, 2, "unknown command"},

		// inspect
		{"inspect good case", []string{"inspect", good}, 0, ""},
		{"inspect without folder", []string{"inspect"}, 2, "usage"},
		{"inspect two folders", []string{"inspect", good, good}, 2, "one folder expected"},
		{"inspect unknown flag", []string{"inspect", "--fast", good}, 2, "fast"},
		{"inspect negative workers", []string{"inspect", good, "--workers", "-1"}, 2, "--workers"},
		{"inspect missing folder", []string{"inspect", missing}, 1, "does not exist"},
		{"inspect a file", []string{"inspect", file}, 1, "not a folder"},

		// analyze
		{"analyze good case", []string{"analyze", good, "--trials", "0"}, 0, ""},
		{"analyze negative threshold", []string{"analyze", good, "--threshold", "-3"}, 2, "--threshold -3"},
		{"analyze threshold not a number", []string{"analyze", good, "--threshold", "lots"}, 2, "threshold"},
		{"analyze negative margin", []string{"analyze", good, "--margin", "-1"}, 2, "--margin -1"},
		{"analyze margin too large", []string{"analyze", good, "--margin", "1000"}, 2, "--margin 1000"},
		{"analyze unknown model", []string{"analyze", good, "--model", "linear"}, 2, `--model "linear"`},
		{"analyze negative trials", []string{"analyze", good, "--trials", "-5"}, 2, "--trials -5"},
		{"analyze too many trials", []string{"analyze", good, "--trials", "100000000"}, 2, "--trials 100000000: want 0 to"},
		{"analyze NaN threshold", []string{"analyze", good, "--threshold", "NaN"}, 2, "--threshold NaN"},
		{"analyze exclude a missing sonication", []string{"analyze", good, "--exclude", "9", "--trials", "0"}, 1, "sonication 9 does not exist (the case has sonications 1, 2, 3)"},
		{"analyze bad exclude", []string{"analyze", good, "--exclude", "2,x"}, 2, `"x" is not a sonication number`},
		{"analyze no folder", []string{"analyze"}, 2, "one case folder expected"},
		{"analyze missing folder", []string{"analyze", missing}, 1, "does not exist"},
		{"analyze json into missing folder", []string{"analyze", good, "--json", filepath.Join(missing, "r.json")}, 1, "absent"},
		{"analyze json under a file", []string{"analyze", good, "--json", filepath.Join(file, "r.json")}, 1, "plain.txt: is a file, not a folder"},
		{"analyze unknown target", []string{"analyze", good, "--target", "Nothing"}, 1, `"Nothing"`},
		{"analyze missing contour file", []string{"analyze", good, "--contours", filepath.Join(tmp, "none.json")}, 1, "none.json"},

		// report
		{"report no output", []string{"report", good}, 2, "at least one output"},
		{"report dpi too low", []string{"report", good, "-o", out("r.png"), "--dpi", "10"}, 2, "--dpi 10"},
		{"report bad model", []string{"report", good, "-o", out("r.png"), "--model", "x"}, 2, "--model"},
		{"report into missing folder", []string{"report", good, "-o", filepath.Join(missing, "r.png")}, 1, "absent"},
		{"report under a file", []string{"report", good, "--csv", filepath.Join(file, "m.csv")}, 1, "plain.txt: is a file, not a folder"},
		{"report missing case", []string{"report", missing, "--json", out("m.json")}, 1, "does not exist"},

		// deidentify
		{"deidentify one argument", []string{"deidentify", good}, 2, "CASE_DIR and OUT_DIR expected"},
		{"deidentify bad dates", []string{"deidentify", good, out("d1"), "--dates", "blur"}, 2, "--dates"},
		{"deidentify shift without shift mode", []string{"deidentify", good, out("d2"), "--dates", "remove", "--shift-days", "-400"}, 2, "--shift-days"},
		{"deidentify into non-empty folder", []string{"deidentify", good, nonEmpty}, 1, "not empty"},
		{"deidentify onto a file", []string{"deidentify", good, file}, 1, "plain.txt: is a file, not a folder"},
		{"deidentify under a file", []string{"deidentify", good, filepath.Join(file, "d")}, 1, "a part of the path is a file"},
		{"deidentify missing case", []string{"deidentify", missing, out("d3")}, 1, "does not exist"},

		// demo
		{"demo no folder", []string{"demo"}, 2, "usage"},
		{"demo negative cases", []string{"demo", out("demo1"), "--cases", "-1"}, 2, "--cases -1"},
		{"demo too many cases", []string{"demo", out("demo2"), "--cases", "5000"}, 2, "--cases 5000"},
		{"demo bad option after the folder", []string{"demo", "--seed", "2", out("demo3"), "--cases", "many"}, 2, "cases"},
		{"demo into non-empty folder", []string{"demo", nonEmpty}, 1, "not empty"},
		{"demo under a file", []string{"demo", filepath.Join(file, "d")}, 1, "plain.txt"},

		// audit
		{"audit no output", []string{"audit", good}, 2, "no output folder"},
		{"audit bad shard", []string{"audit", good, "-o", out("a1"), "--shard", "0/2"}, 2, "0/2"},
		{"audit bad workers", []string{"audit", good, "-o", out("a2"), "--workers", "-2"}, 2, "--workers -2"},
		{"audit missing input", []string{"audit", missing, "-o", out("a3")}, 1, "input folder " + missing + ": does not exist"},
		{"audit input is a file", []string{"audit", file, "-o", out("a6")}, 1, "plain.txt: is a file, not a folder"},
		{"audit missing settings", []string{"audit", good, "-o", out("a4"), "--settings", filepath.Join(tmp, "none.json")}, 1, "none.json"},
		{"audit invalid settings", []string{"audit", good, "-o", out("a9"), "--settings", badSettings}, 1, `unknown field "treshold"`},
		{"audit unknown flag", []string{"audit", good, "-o", out("a7"), "--fast"}, 2, "fast"},
		{"audit no folder", []string{"audit", "-o", out("a8")}, 2, "no case folder given"},
		{"audit no case", []string{"audit", nonEmpty, "-o", out("a5")}, 1, "no case found"},
		{"audit output under a file", []string{"audit", good, "-o", filepath.Join(file, "a")}, 1, "a part of the path is a file"},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, stdout, stderr := runCmd(c.args...)
			if code != c.code {
				t.Errorf("%s: exit %d, want %d\nstdout: %s\nstderr: %s", strings.Join(c.args, " "), code, c.code, lastLines(stdout, 5), stderr)
			}
			if c.says != "" && !strings.Contains(stderr, c.says) {
				t.Errorf("%s: message does not say %q:\n%s", strings.Join(c.args, " "), c.says, stderr)
			}
			if bad := rawMessage(stdout + stderr); len(bad) > 0 {
				t.Errorf("%s: raw error text %q in:\n%s", strings.Join(c.args, " "), bad, stderr)
			}
		})
	}
	// Refused commands wrote nothing.
	for _, p := range []string{"d1", "d2", "d3", "demo1", "demo2", "demo3", "a1", "a2", "a3", "a4", "a6", "a7", "a8", "a9", "r.png"} {
		if _, err := os.Stat(out(p)); !os.IsNotExist(err) {
			t.Errorf("%s was written by a refused command", p)
		}
	}
	if ents, _ := os.ReadDir(nonEmpty); len(ents) != 1 {
		t.Errorf("the non-empty folder was written into: %d entries", len(ents))
	}
}
