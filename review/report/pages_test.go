package report

import (
	"context"
	"fmt"
	"math"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/review"
)

// sixtySpots is the phantom of phantomCase treated with 60 small
// sonications (ready dose maps) on a ring around the target centre, the
// last one 12 mm beyond the target; sonication 37 is left out.
func sixtySpots(t *testing.T) (*dosemap.Case, *review.Result) {
	t.Helper()
	c := phantomCase()
	g := c.Sonications[0].Geometry
	start := c.Sonications[0].Start
	c.Sonications = nil
	for n := 1; n <= 60; n++ {
		a := 2 * math.Pi * float64(n) / 60
		centre := dosemap.Vec3{4 * math.Cos(a), 4 * math.Sin(a), 0}
		if n == 60 {
			centre = dosemap.Vec3{19, 0, 0}
		}
		d := make([]float32, g.Len())
		for k := range d {
			i, j, l := g.IJK(k)
			r := g.Point(float64(i), float64(j), float64(l)).Sub(centre).Norm()
			d[k] = float32(math.Min(240*math.Exp((2-r)/1.0), 1e5))
		}
		c.Sonications = append(c.Sonications, &dosemap.Sonication{Number: n, Label: fmt.Sprintf("spot %02d", n),
			Geometry: g, Dose: d, Start: start.Add(time.Duration(n) * time.Minute)})
	}
	set := review.DefaultSettings()
	set.Trials = 0
	set.Excluded = []int{37}
	r, err := review.Analyze(context.Background(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	return c, r
}

// TestSixtySonicationsEveryRow writes the report of a 60-sonication
// session as PDF and reads it back with poppler's pdftotext and pdfinfo
// (outside tools): two pages, page 2 marked "page 2 of 2", every
// sonication listed exactly once, the one left out named in the header,
// both coverages labelled, and no internal field name in the text.
func TestSixtySonicationsEveryRow(t *testing.T) {
	c, r := sixtySpots(t)
	in, err := FromResult(c, r, Options{PanelPixels: 120, InputsSHA256: "00ff", ReviewDate: time.Date(2026, 11, 2, 9, 30, 0, 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	out := Outputs{PDF: filepath.Join(dir, "r.pdf"), PNG: filepath.Join(dir, "r.png")}
	if err := Write(in, "", out); err != nil {
		t.Fatal(err)
	}
	info, err := exec.Command(pdfTool(t, "pdfinfo"), out.PDF).CombinedOutput()
	if err != nil || !regexp.MustCompile(`(?m)^Pages:\s+2$`).Match(info) {
		t.Errorf("pdfinfo: %v\n%s", err, info)
	}
	txt, err := exec.Command(pdfTool(t, "pdftotext"), "-layout", out.PDF, "-").CombinedOutput()
	if err != nil {
		t.Fatalf("pdftotext: %v\n%s", err, txt)
	}
	pages := strings.Split(string(txt), "\f")
	if len(pages) < 2 || !strings.Contains(pages[0], "page 1 of 2") || !strings.Contains(pages[1], "page 2 of 2") {
		t.Errorf("pages not marked 1 of 2 and 2 of 2")
	}
	for n := 1; n <= 60; n++ {
		if k := strings.Count(string(txt), fmt.Sprintf("spot %02d", n)); k != 1 {
			t.Errorf("spot %02d listed %d times, want once", n, k)
		}
	}
	flat := strings.Join(strings.Fields(string(txt)), " ")
	for _, want := range []string{
		"Left out of the cumulative dose by the reviewer: sonication 37",
		"of the monitored part", "of the whole target",
		"Continued on page 2 of 2",
	} {
		if !strings.Contains(flat, want) {
			t.Errorf("report text lacks %q", want)
		}
	}
	// Internal names are snake_case words (JSON keys): none in the text.
	if m := regexp.MustCompile(`\b[a-z0-9]+_[a-z0-9_]+\b`).FindAllString(string(txt), -1); len(m) > 0 {
		t.Errorf("internal field names in the report text: %q", m)
	}
	// One PNG per page.
	for _, p := range []string{out.PNG, PagePNG(out.PNG, 2)} {
		if _, err := exec.Command("test", "-s", p).CombinedOutput(); err != nil {
			t.Errorf("%s not written", p)
		}
	}
}

// TestDoseModelLine: the methods block shows the dose model and the
// parameters the analysis used (the settings given), not the defaults.
func TestDoseModelLine(t *testing.T) {
	c := phantomCase()
	for _, tc := range []struct {
		name string
		set  func(s *review.Settings)
		want string
	}{
		// Sapareto & Dewey 1984: R 0.5 above, 0.25 below 43 °C (the defaults).
		{"default", func(s *review.Settings) {}, "CEM43, R 0.5 at or above / 0.25 below 43 °C, trapezoid rule"},
		{"custom R", func(s *review.Settings) { s.CEM43.RAbove, s.CEM43.RBelow, s.CEM43.Break = 0.6, 0.2, 44 }, "CEM43, R 0.6 at or above / 0.2 below 44 °C"},
	} {
		set := review.DefaultSettings()
		set.Trials = 0
		tc.set(&set)
		r, err := review.Analyze(context.Background(), c, set, nil)
		if err != nil {
			t.Fatal(err)
		}
		got := ""
		for _, m := range methods(c, r, Options{}) {
			if m.Name == "Dose model" {
				got = m.Value
			}
		}
		if !strings.HasPrefix(got, tc.want) {
			t.Errorf("%s: dose model line %q, want %q", tc.name, got, tc.want)
		}
	}
	// The Arrhenius model needs thermometry, which this phantom lacks: the
	// line is checked on the result's own record of its model and
	// parameters (the liver set of dosemap.ArrheniusSets).
	set := review.DefaultSettings()
	set.Trials = 0
	r, err := review.Analyze(context.Background(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	r.Model, r.Settings.Model, r.Settings.Arrhenius = "arrhenius", "arrhenius", dosemap.ArrheniusSets[1]
	for _, m := range methods(c, r, Options{}) {
		if want := "Arrhenius (liver), A 7.39e+39 /s, Ea 2.577e+05 J/mol"; m.Name == "Dose model" && m.Value != want {
			t.Errorf("arrhenius: dose model line %q, want %q", m.Value, want)
		}
	}
}
