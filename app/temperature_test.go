//go:build cgo

package main

import (
	"context"
	"math"
	"testing"
	"time"

	"dosecover/dosemap"
)

// TestProbeUsesSessionSeries: with the prepared thermometry options the
// probe's temperature series are the very ones the analysis session keeps
// (not a second computation); with other options they are computed anew.
// The probe at a voxel of a temperature-map sonication reads the map's own
// value (50 °C put in at the centre, 37 °C elsewhere).
func TestProbeUsesSessionSeries(t *testing.T) {
	lc := syntheticCase()
	tg := lc.Case.Sonications[0].Geometry
	so := &dosemap.Sonication{Number: 4, Label: "temperature map", Geometry: tg, Times: []float64{0, 3, 6}}
	centre := tg.Len()/2 + tg.Cols/2
	for f := range 3 {
		fr := make([]float32, tg.Len())
		for n := range fr {
			fr[n] = 37
		}
		if f > 0 {
			fr[centre] = 50
		}
		so.Temperature = append(so.Temperature, fr)
	}
	lc.Case.Sonications = append(lc.Case.Sonications, so)
	set := defaultSettings()
	set.Trials = 0
	s, err := prepareReview(context.Background(), lc, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	ss := s.(*reviewSession)
	series, err := ss.temperatures(set)
	if err != nil {
		t.Fatal(err)
	}
	kept := ss.rs.Temperature(4)
	if kept == nil || series[3] != kept {
		t.Fatalf("series of sonication 4: %p, session keeps %p", series[3], kept)
	}
	for n := range 3 {
		if series[n] != nil {
			t.Errorf("dose-map sonication %d has a temperature series", n+1)
		}
	}
	i, j, k := tg.IJK(centre)
	c, err := ss.Probe(tg.Point(float64(i), float64(j), float64(k)), set)
	if err != nil {
		t.Fatal(err)
	}
	if got := c.Temp[len(c.Temp)-1]; math.Abs(got-50) > 1e-6 {
		t.Errorf("probe reads %.3f °C, want 50", got)
	}
	other := set
	other.BodyTemp = set.BodyTemp + 1
	again, err := ss.temperatures(other)
	if err != nil {
		t.Fatal(err)
	}
	if again[3] == nil || again[3] == kept {
		t.Errorf("other thermometry options: series %p, want a new one", again[3])
	}
}

// TestProbeEstimatedTrue: the pinned point's estimated true temperature is
// the measured one plus the session's residual heat estimate at that
// sonication's baseline (review.Session.Residual), shown only where there
// is one. Two temperature-map sonications 15 s apart: the first cools from
// 52 to 48 °C at the centre over its last frames, the second measures no
// change; its estimated true temperature must lie above 37 °C by the
// session's estimate there.
func TestProbeEstimatedTrue(t *testing.T) {
	lc := syntheticCase()
	tg := lc.Case.Sonications[0].Geometry
	start := lc.Case.Sonications[0].Start
	centre := tg.Len()/2 + tg.Cols/2
	var sons []*dosemap.Sonication
	for n := range 2 {
		so := &dosemap.Sonication{Number: n + 1, Label: "temperature map", Geometry: tg,
			Start: start.Add(time.Duration(n*45) * time.Second), Times: []float64{0, 3, 6, 9, 12, 15, 18, 21, 24}}
		for f := range so.Times {
			fr := make([]float32, tg.Len())
			for v := range fr {
				fr[v] = 37
			}
			if n == 0 && f >= 2 {
				fr[centre] = float32(52 - 2*math.Max(0, float64(f-6)))
			}
			so.Temperature = append(so.Temperature, fr)
		}
		sons = append(sons, so)
	}
	lc.Case.Sonications = sons
	set := defaultSettings()
	set.Trials = 0
	s, err := prepareReview(context.Background(), lc, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	ss := s.(*reviewSession)
	i, j, k := tg.IJK(centre)
	p := tg.Point(float64(i), float64(j), float64(k))
	c, err := ss.Probe(p, set)
	if err != nil {
		t.Fatal(err)
	}
	r := ss.rs.Residual(2)
	if r == nil || len(c.True) != len(c.Temp) || len(c.Temp) != 18 {
		t.Fatalf("residual %v; %d estimated and %d measured temperatures, want 18", r, len(c.True), len(c.Temp))
	}
	hidden := float64(r.Sample(p))
	if !(hidden > 0.1) {
		t.Fatalf("estimated residual heat at the centre %g °C; want some after 52 °C fifteen seconds before", hidden)
	}
	for n := 9; n < 18; n++ {
		if math.Abs(c.True[n]-(c.Temp[n]+hidden)) > 1e-9 {
			t.Errorf("frame %d: estimated true %g °C, measured %g + residual %g", n, c.True[n], c.Temp[n], hidden)
		}
	}
	if c.True[0] != c.Temp[0] {
		t.Errorf("first sonication: estimated true %g °C, measured %g (no earlier heat)", c.True[0], c.Temp[0])
	}
}
