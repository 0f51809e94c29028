package review_test

import (
	"context"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/review"
)

// loadSession writes the simulated session s as DICOM into a temporary
// folder and reads it back as the commands do (frames left in their
// files), returning the case and the simulation's truth.
func loadSession(t *testing.T, s *sim.Session) (*dosemap.Case, *sim.Truth) {
	t.Helper()
	dir := t.TempDir()
	truth, err := sim.WriteSession(dir, s)
	if err != nil {
		t.Fatal(err)
	}
	c, _, err := dicomio.Load(context.Background(), dir, dicomio.LoadOptions{Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return c, truth
}

// analyseSession writes s, reads it back and analyses it without Monte
// Carlo trials.
func analyseSession(t *testing.T, s *sim.Session) *review.Result {
	t.Helper()
	c, _ := loadSession(t, s)
	set := review.DefaultSettings()
	set.Trials = 0
	r, err := review.Analyze(context.Background(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	return r
}
