//go:build cgo

package main

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/sim"
)

func TestAnalyzeUsage(t *testing.T) {
	for _, args := range [][]string{
		{"analyze"}, {"analyze", "a", "b"}, {"analyze", "--bogus", "x"},
		{"analyze", "x", "--model", "other"}, {"analyze", "x", "--threshold", "-3"},
		{"analyze", "x", "--margin", "-1"}, {"analyze", "x", "--exclude", "one"},
	} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 2 {
			t.Errorf("%v: exit %d, want 2 (usage): %s", args, code, errb.String())
		}
	}
}

func TestAnalyzeNotACase(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct{ arg, want string }{
		{filepath.Join(dir, "absent"), "absent"},
		{dir, "cannot be analysed"},
	} {
		var out, errb bytes.Buffer
		if code := run([]string{"analyze", tc.arg}, &out, &errb); code != 1 {
			t.Errorf("%s: exit %d, want 1", tc.arg, code)
		}
		if !strings.Contains(errb.String(), tc.want) {
			t.Errorf("%s: message %q lacks %q", tc.arg, errb.String(), tc.want)
		}
	}
}

// TestAnalyzeDemo runs the command on the simulated demo case and checks
// it against the simulation's truth.json: the lethal cluster outside the
// margin is attributed to the sonication the simulation aimed beyond the
// margin, and the JSON is written outside the case folder only.
func TestAnalyzeDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses the demo case")
	}
	dir := t.TempDir()
	truth, err := sim.WriteDemo(dir)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "result.json")
	var stdout, stderr bytes.Buffer
	if code := run([]string{"analyze", dir, "--json", out, "--trials", "4"}, &stdout, &stderr); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	for _, want := range []string{"threshold 240 CEM43", "margin 3 mm", "not a treatment planning"} {
		if !strings.Contains(stdout.String(), want) {
			t.Errorf("summary lacks %q", want)
		}
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	var r struct {
		TargetVolumeML  float64 `json:"target_volume_ml"`
		OutsideClusters []struct {
			VolumeMM3  float64 `json:"volume_mm3"`
			Sonication int     `json:"sonication"`
		} `json:"outside_clusters"`
		Sonications []struct{} `json:"sonications"`
	}
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	// Target volume: truth from the simulated phantom; the slab model of
	// its contours on 1.25 mm thermometry pixels, within 5 %.
	if math.Abs(r.TargetVolumeML*1000-truth.TargetVolumeMM3) > 0.05*truth.TargetVolumeMM3 {
		t.Errorf("target %.1f mm³, truth %.1f", r.TargetVolumeML*1000, truth.TargetVolumeMM3)
	}
	if len(r.Sonications) != len(truth.Sonications) {
		t.Errorf("%d sonications, truth %d", len(r.Sonications), len(truth.Sonications))
	}
	if len(truth.Spill) > 0 {
		if len(r.OutsideClusters) == 0 {
			t.Fatalf("no lethal cluster outside the margin; truth: sonications %v spilled", truth.Spill)
		}
		if got := r.OutsideClusters[0].Sonication; got != truth.Spill[0] {
			t.Errorf("largest outside cluster attributed to sonication %d, truth %v", got, truth.Spill)
		}
	}
	// Writing into the case folder is refused.
	stdout.Reset()
	stderr.Reset()
	if code := run([]string{"analyze", dir, "--json", filepath.Join(dir, "r.json"), "--trials", "0"}, &stdout, &stderr); code != 1 || !strings.Contains(stderr.String(), "inside the case folder") {
		t.Errorf("JSON into the case folder: exit %d, %s", code, stderr.String())
	}
}
