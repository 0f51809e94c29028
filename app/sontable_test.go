//go:build cgo

package main

import (
	"testing"

	"dosecover/dosemap"
)

// TestSonicationTableAfterReanalysis follows the steps after which the
// sonication table once came up empty: drawing a drift reference,
// exporting the report, switching teaching mode on and off, then a
// re-analysis (a sonication left out and taken back). After each step the
// table must list every sonication, drawn with its check box.
func TestSonicationTableAfterReanalysis(t *testing.T) {
	for _, demo := range []bool{false, true} {
		rw := testWindow(t)
		if demo {
			openDemoCase(t, rw)
		} else {
			openSynthetic(t, rw)
		}
		sonicationTableSteps(t, rw)
	}
}

func sonicationTableSteps(t *testing.T, rw *reviewWindow) {
	want := len(rw.result.Sonications)
	check := func(step string) {
		t.Helper()
		rows, _ := rw.sonTable.Length()
		if rows != want || want == 0 {
			t.Fatalf("after %s: the table has %d rows, want %d", step, rows, want)
		}
		if n := len(checksOf(rw.sonTable)); n == 0 {
			t.Fatalf("after %s: no row drawn", step)
		}
	}
	check("opening")
	mark := rw.completed.Load()
	g := rw.loaded.Case.Sonications[0].Geometry
	a, b := g.Point(1, 1, 0), g.Point(9, 9, 0)
	rw.refDrawn(a, b, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, 1, 0})
	waitJobs(t, rw, mark, 1)
	check("drawing a drift reference")
	exportTo(t, rw)
	check("exporting")
	rw.teachCheck.SetChecked(true)
	check("teaching mode on")
	mark = rw.completed.Load()
	rw.setExcluded(2, true)
	waitJobs(t, rw, mark, 1)
	check("leaving sonication 2 out")
	rw.teachCheck.SetChecked(false)
	mark = rw.completed.Load()
	rw.setExcluded(2, false)
	waitJobs(t, rw, mark, 1)
	check("taking sonication 2 back")
}
