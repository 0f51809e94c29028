package review

import (
	"testing"

	"dosecover/dosemap"
)

// TestKeepBox: the block holds the points and their taps (one voxel
// in-plane, two slices), clamped to the grid; index and ids are inverse;
// crop copies each voxel's values and noise to its place in the block, and
// the block's grid puts the voxel at the same patient position.
func TestKeepBox(t *testing.T) {
	g := dosemap.NewAxialGeometry(40, 30, 8, dosemap.Vec3{1.25, 1.25, 3}, dosemap.Vec3{-20, -15, 0})
	ext := []vec3{g.Point(10.2, 5.7, 3.4), g.Point(20.6, 12.1, 4.2)}
	b := newKeepBox(g, ext)
	// Worked by hand: i 10.2..20.6 → floor 10 − 1 = 9, ceil 21 + 1 = 22;
	// j 5.7..12.1 → 5 − 1 = 4, 13 + 1 = 14; k 3.4..4.2 → 3 − 2 = 1,
	// 5 + 2 = 7.
	if b.lo != [3]int{9, 4, 1} || b.hi != [3]int{22, 14, 7} {
		t.Fatalf("block %v..%v, want [9 4 1]..[22 14 7]", b.lo, b.hi)
	}
	if len(b.ids) != b.sub.Len() || b.sub.Len() != 14*11*7 {
		t.Fatalf("%d ids for %d voxels", len(b.ids), b.sub.Len())
	}
	for q, n := range b.ids {
		if b.index(n) != q {
			t.Fatalf("index(ids[%d]) = %d", q, b.index(n))
		}
	}
	if b.index(g.Index(8, 5, 3)) != -1 || b.index(g.Index(10, 5, 0)) != -1 {
		t.Error("voxels outside the block have an index")
	}
	ts := &dosemap.TemperatureSeries{Geometry: g, Times: []float64{0, 3}, Sigma: make([]float32, g.Len())}
	for f := 0; f < 2; f++ {
		fr := make([]float32, g.Len())
		for n := range fr {
			fr[n] = float32(n) + 0.5*float32(f)
		}
		ts.Frames = append(ts.Frames, fr)
	}
	for n := range ts.Sigma {
		ts.Sigma[n] = float32(n % 7)
	}
	c := b.crop(ts)
	for q, n := range b.ids {
		for f := range ts.Frames {
			if c.Frames[f][q] != ts.Frames[f][n] {
				t.Fatalf("frame %d block voxel %d: %g, want %g", f, q, c.Frames[f][q], ts.Frames[f][n])
			}
		}
		if c.Sigma[q] != ts.Sigma[n] {
			t.Fatalf("sigma of block voxel %d", q)
		}
		i, j, k := c.Geometry.IJK(q)
		if d := c.Geometry.Point(float64(i), float64(j), float64(k)).Sub(g.Point(ijk(g, n))).Norm(); d > 1e-9 {
			t.Fatalf("block voxel %d lies %g mm from its voxel", q, d)
		}
	}
	// Points beyond the grid clamp the block to it.
	all := newKeepBox(g, []vec3{g.Point(-5, -5, -5), g.Point(50, 50, 50)})
	if all.sub.Len() != g.Len() {
		t.Errorf("block of %d voxels, want the whole grid's %d", all.sub.Len(), g.Len())
	}
}
