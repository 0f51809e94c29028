package review

import (
	"bytes"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
)

// TestAddSonicationMatchesPrepare: a session prepared with the first
// sonications and grown one sonication at a time gives, after each, the
// result Prepare gives for those sonications at once (same JSON: coverage,
// holes, per-sonication and residual heat figures, Monte Carlo band), with
// the residual heat as measured and corrected (carry_over): on the demo's
// first sonications, and on the first sonications of a two-plane session
// (one series per plane) with 13 s of cooling between them.
func TestAddSonicationMatchesPrepare(t *testing.T) {
	demo := sim.DemoSession()
	demo.Motion = nil
	for _, s := range []*sim.Session{demo, sim.ShortGapPlanesSession(sim.LayoutTwoPlaneSeries, 1, 13)} {
		t.Run(s.Label, func(t *testing.T) { checkGrown(t, s) })
	}
	var none *dosemap.Sonication
	if err := (&Session{}).AddSonication(t.Context(), none); err == nil {
		t.Error("nil sonication accepted")
	}
}

// checkGrown checks the first four sonications of s grown one at a time
// against Prepare (TestAddSonicationMatchesPrepare).
func checkGrown(t *testing.T, s *sim.Session) {
	dir := filepath.Join(t.TempDir(), "case")
	s.Sonications = s.Sonications[:4]
	if _, err := sim.WriteSession(dir, s); err != nil {
		t.Fatal(err)
	}
	ctx := t.Context()
	c, _, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, carry := range []bool{false, true} {
		set := DefaultSettings()
		set.Trials = 8
		set.CarryOver = carry
		part := *c
		part.Sonications = c.Sonications[:2]
		ses, err := Prepare(ctx, &part, set, nil)
		if err != nil {
			t.Fatal(err)
		}
		for n := 2; n < len(c.Sonications); n++ {
			if err := ses.AddSonication(ctx, c.Sonications[n]); err != nil {
				t.Fatal(err)
			}
			got, err := ses.Analyze(ctx, set, nil)
			if err != nil {
				t.Fatal(err)
			}
			whole := *c
			whole.Sonications = c.Sonications[:n+1]
			want, err := Analyze(ctx, &whole, set, nil)
			if err != nil {
				t.Fatal(err)
			}
			var a, b bytes.Buffer
			want.WriteJSON(&a)
			got.WriteJSON(&b)
			if a.String() != b.String() {
				al, bl := strings.Split(a.String(), "\n"), strings.Split(b.String(), "\n")
				for l := range min(len(al), len(bl)) {
					if al[l] != bl[l] {
						t.Fatalf("carry_over %v, %d sonications: line %d differs:\nprepared: %s\ngrown:    %s", carry, n+1, l+1, al[l], bl[l])
					}
				}
				t.Fatalf("carry_over %v, %d sonications: %d and %d lines", carry, n+1, len(al), len(bl))
			}
			if n == len(c.Sonications)-1 && got.Sonications[n].ResidualRiseC == nil {
				t.Errorf("carry_over %v: no residual heat estimate for the last sonication", carry)
			}
		}
		if err := ses.AddSonication(ctx, c.Sonications[3]); err == nil {
			t.Error("a sonication number added twice was accepted")
		}
	}
}
