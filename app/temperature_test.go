//go:build cgo

package main

import (
	"context"
	"math"
	"testing"

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
