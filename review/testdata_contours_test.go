package review

import (
	"math"
	"path/filepath"
	"testing"

	"dosecover/dosemap"
)

// TestContourFileExample reads the example contour file shipped in the
// repository's testdata/ folder: a 20 × 20 mm square target with a
// 10 × 10 mm square hole (even-odd rule) on the planes z = 0, 2, 4, 6 mm, and
// a 4 × 4 mm avoid block on z = 2, 4 mm. By the slab model each plane stands
// for 2 mm (the end planes 1 mm beyond themselves), so the target holds
// (400 − 100) mm² × 8 mm = 2400 mm³ and the block 16 mm² × 4 mm = 64 mm³
// (computed from the geometry). The grid's voxel faces fall on the square
// edges and slab ends, so the sampled volume is exact up to float rounding:
// tolerance 0.1 %.
func TestContourFileExample(t *testing.T) {
	structs, frame, err := ReadContourFile(filepath.Join("..", "testdata", "contours-square-ring.json"))
	if err != nil {
		t.Fatal(err)
	}
	if frame != "2.25.1000" || len(structs) != 2 {
		t.Fatalf("frame %q, %d structures", frame, len(structs))
	}
	g := dosemap.NewAxialGeometry(80, 60, 24, dosemap.Vec3{0.5, 0.5, 0.5}, dosemap.Vec3{-14.75, -14.75, -2.75})
	for _, c := range []struct {
		n    int
		role dosemap.StructureRole
		want float64 // mm³
	}{{0, dosemap.RoleTarget, 2400}, {1, dosemap.RoleAvoid, 64}} {
		s := structs[c.n]
		if s.Role != c.role {
			t.Errorf("%s: role %v, want %v", s.Name, s.Role, c.role)
		}
		occ, err := Occupancy(&s, g, 2)
		if err != nil {
			t.Fatal(err)
		}
		var sum float64
		for _, f := range occ {
			sum += float64(f)
		}
		if got := sum * g.VoxelVolume(); math.Abs(got-c.want) > 1e-3*c.want {
			t.Errorf("%s: %.2f mm³, want %.0f", s.Name, got, c.want)
		}
	}
}
