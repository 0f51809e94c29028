//go:build cgo

package main

import (
	"math"
	"testing"

	"dosecover/dosemap"
	"dosecover/review/view"
)

// TestSelectingShowsItsPlanes: when the sonications were measured on
// planes of their own, selecting a sonication emphasises its planes and
// moves the view parallel to one of them onto it (the view's plane lies
// inside that stack's slab, face-on), and the other view to the slice
// through the sonication's hottest point. The synthetic case's third
// sonication (a blob at (0, 16, 0)) is given a coronal plane through
// y = 16.3 mm besides its axial slab.
func TestSelectingShowsItsPlanes(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	// One shared grid: no planes to draw, so neither their check nor
	// their legend entry is shown.
	if len(rw.planeControls) != 2 {
		t.Fatalf("%d plane controls, want the check and the legend entry", len(rw.planeControls))
	}
	for _, o := range rw.planeControls {
		if o.Visible() {
			t.Errorf("plane control %T shown for a case on one shared grid", o)
		}
	}
	coronal := dosemap.Geometry{Cols: 30, Rows: 30, Slices: 1, Spacing: dosemap.Vec3{2, 2, 3},
		Origin: dosemap.Vec3{-29, 16.3, 29}, Row: dosemap.Vec3{1, 0, 0}, Col: dosemap.Vec3{0, 0, -1}, Normal: dosemap.Vec3{0, 1, 0}}
	so := rw.loaded.Case.Sonications[2]
	so.Stacks = append(so.Stacks, &dosemap.Sonication{Number: so.Number, Geometry: coronal})

	rw.viewers[0].setSlice(0) // away from the hottest point
	rw.selectSonication(2)
	for _, o := range rw.planeControls {
		if !o.Visible() {
			t.Errorf("plane control %T hidden for a case with planes of its own", o)
		}
	}
	emph := 0
	for _, st := range rw.scene.Planes {
		if st.Emphasis != (st.Sonication == 3) {
			t.Errorf("stack of sonication %d emphasised %v", st.Sonication, st.Emphasis)
		}
		if st.Emphasis {
			emph++
		}
	}
	if emph != 2 {
		t.Fatalf("%d stacks emphasised, want sonication 3's two", emph)
	}
	// The coronal view (rows × slices of the axial anatomy) lies in the
	// coronal plane's slab, 1.5 mm either side of y = 16.3.
	cor := rw.viewers[1]
	ct, ok := cor.transform(400, 400)
	if !ok {
		t.Fatal("no coronal view")
	}
	cp, _ := slicePlane(ct)
	if tr := view.StackTrace(coronal, cp); !tr.FaceOn {
		t.Errorf("coronal view at y = %.2f mm does not show the plane at y = 16.3 face-on", cp.Origin[1])
	}
	// The axial view goes to the slice through the hottest point of
	// sonication 3: the blob's centre at z = 0 (by construction), found
	// on its dose grid's voxel centres (3 mm apart: within 1.5 mm) and
	// shown on the anatomy slice nearest it (within 1 mm more).
	at, _ := rw.viewers[0].transform(400, 400)
	if d := math.Abs(at.Centre[2]); d > 2.5+1e-9 {
		t.Errorf("axial view at z = %.2f mm, the hottest point at z = 0", at.Centre[2])
	}
	// Back to the cumulative dose: nothing emphasised.
	rw.selectSonication(-1)
	for _, st := range rw.scene.Planes {
		if st.Emphasis {
			t.Fatalf("stack of sonication %d still emphasised", st.Sonication)
		}
	}
}
