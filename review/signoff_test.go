package review_test

import (
	"context"
	"encoding/json"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/review"
)

// A sign-off applies to the analysis it was made on and to no other: a
// changed margin, thermometry option, CEM43 parameter, left-out sonication
// or input file each make it stale, and the difference is named in words
// (no JSON key).
func TestSignOffStale(t *testing.T) {
	c := ballCase()
	second := *c.Sonications[0]
	second.Number = 2
	c.Sonications = append(c.Sonications, &second)
	ctx := context.Background()
	set := review.DefaultSettings()
	r, err := review.Analyze(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	at := time.Date(2026, 5, 4, 13, 30, 0, 0, time.UTC)
	so, err := review.NewSignOff("A. Reviewer", review.OutcomeAccepted, "holes at the edge reviewed", "abc123", "2.25.7", r, at)
	if err != nil {
		t.Fatal(err)
	}
	if d := so.Differences("abc123", "2.25.7", r); len(d) != 0 {
		t.Fatalf("the analysis signed off differs from itself: %q", d)
	}
	// The same settings analysed again: still signed off.
	r2, err := review.Analyze(ctx, c, review.DefaultSettings(), nil)
	if err != nil {
		t.Fatal(err)
	}
	st := review.SignOffFor([]review.SignOff{so}, "abc123", "2.25.7", r2)
	if st.Valid == nil || !strings.Contains(st.Line(false), "signed off by A. Reviewer on 2026-05-04 13:30 UTC: coverage accepted") {
		t.Errorf("same analysis: %q", st.Line(false))
	}
	for _, tc := range []struct {
		name   string
		change func(s *review.Settings)
		hash   string
		study  string
		want   []string
	}{
		{"margin", func(s *review.Settings) { s.MarginMM = 5 }, "abc123", "2.25.7", []string{"margin (mm): 3 then, 5 now"}},
		{"body temperature", func(s *review.Settings) { s.Thermometry.BodyTempC = 36 }, "abc123", "2.25.7", []string{"thermometry", "37 then, 36 now"}},
		{"R above the break", func(s *review.Settings) { s.CEM43.RAbove = 0.6 }, "abc123", "2.25.7", []string{"CEM43 model", "0.5 then, 0.6 now"}},
		{"drift reference", func(s *review.Settings) {
			s.Thermometry.DriftReference = review.NewRect(dosemap.Vec3{-1000, -1000, 0}, dosemap.Vec3{1000, 1000, 0}, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, 1, 0})
		}, "abc123", "2.25.7", []string{"thermometry drift reference: none then, "}},
		{"left out", func(s *review.Settings) { s.Excluded = []int{2} }, "abc123", "2.25.7", []string{"sonications left out: none then, 2 now"}},
		{"inputs", func(s *review.Settings) {}, "def456", "2.25.7", []string{"input files differ"}},
		{"study", func(s *review.Settings) {}, "abc123", "2.25.8", []string{"another study (2.25.7 then, 2.25.8 now)"}},
	} {
		s := review.DefaultSettings()
		tc.change(&s)
		r3, err := review.Analyze(ctx, c, s, nil)
		if err != nil {
			t.Fatal(err)
		}
		st := review.SignOffFor([]review.SignOff{so}, tc.hash, tc.study, r3)
		line := st.Line(false)
		if st.Valid != nil || !strings.HasPrefix(line, "not signed off for these settings (last sign-off by A. Reviewer on 2026-05-04 13:30 UTC") {
			t.Errorf("%s: %q", tc.name, line)
		}
		for _, w := range tc.want {
			if !strings.Contains(line, w) {
				t.Errorf("%s: %q does not name %q", tc.name, line, w)
			}
		}
		if strings.Contains(line, "margin_mm") || strings.Contains(line, "excluded_sonications") {
			t.Errorf("%s: internal field name in %q", tc.name, line)
		}
		if st.Line(true) == line || strings.Contains(st.Line(true), "A. Reviewer") {
			t.Errorf("%s: anonymous line names the reviewer: %q", tc.name, st.Line(true))
		}
	}
	if st := review.SignOffFor(nil, "abc123", "2.25.7", r); st.Line(false) != "not signed off" {
		t.Errorf("never signed off: %q", st.Line(false))
	}
	if _, err := review.NewSignOff("A. Reviewer", "fine", "", "abc123", "", r, at); err == nil {
		t.Errorf("an outcome outside the list was accepted")
	}
	if _, err := review.NewSignOff(" ", review.OutcomeAccepted, "", "abc123", "", r, at); err == nil {
		t.Errorf("a sign-off without a reviewer was accepted")
	}
}

// TestSignOffBeforeNewSettings: a sign-off written before a setting
// existed (its settings JSON lacks focal_length_mm and drift_flag_c) still
// applies to the same analysis with those settings at their defaults, and
// no longer once one of them differs; a headline written with a coverage
// of 0 for a target with no monitored part reads as not measurable.
func TestSignOffBeforeNewSettings(t *testing.T) {
	r, err := review.Analyze(context.Background(), ballCase(), review.DefaultSettings(), nil)
	if err != nil {
		t.Fatal(err)
	}
	at := time.Date(2026, 5, 4, 13, 30, 0, 0, time.UTC)
	so, err := review.NewSignOff("A. Reviewer", review.OutcomeAccepted, "", "abc123", "2.25.7", r, at)
	if err != nil {
		t.Fatal(err)
	}
	var set map[string]any
	if err := json.Unmarshal(so.Settings, &set); err != nil {
		t.Fatal(err)
	}
	delete(set, "focal_length_mm")
	delete(set, "drift_flag_c")
	if so.Settings, err = json.Marshal(set); err != nil {
		t.Fatal(err)
	}
	if d := so.Differences("abc123", "2.25.7", r); len(d) != 0 {
		t.Errorf("an earlier sign-off of the same analysis differs: %q", d)
	}
	r2 := *r
	r2.Settings.FocalLengthMM = 8
	if d := strings.Join(so.Differences("abc123", "2.25.7", &r2), "; "); !strings.Contains(d, "focal length (mm): 0 then, 8 now") {
		t.Errorf("focal length changed: differences %q", d)
	}

	// Nothing monitored: the headline of then held 0 %, now null.
	r3 := *r
	r3.CoveredFraction, r3.CoveredFractionOfTarget, r3.NotMonitoredFraction = nil, 0, 1
	old := so
	old.Figures = review.HeadlineOf(&r3)
	if old.Figures.CoveredMonitoredPct != nil {
		t.Fatalf("headline of an unmonitored target: %v, want nil", *old.Figures.CoveredMonitoredPct)
	}
	zero := 0.0
	old.Figures.CoveredMonitoredPct = &zero
	if d := old.Differences("abc123", "2.25.7", &r3); len(d) != 0 {
		t.Errorf("an earlier sign-off of an unmonitored target differs: %q", d)
	}
	if s := review.HeadlineOf(&r3).String(); !strings.Contains(s, "not measurable") || strings.Contains(s, "0.0 % of the monitored") {
		t.Errorf("headline %q", s)
	}
}
