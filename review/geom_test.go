package review

import (
	"math"
	"math/rand/v2"
	"testing"

	"dosecover/dosemap"
)

// sphereStructure contours a sphere of radius r about c on axial planes
// z = c[2] + z0 + n*step, each a regular polygon of nv vertices whose area
// equals that of the circle it stands for (radius scaled by
// sqrt(2π/(nv sin(2π/nv))), so polygon area = circle area; computed).
func sphereStructure(name string, c dosemap.Vec3, r, step, z0 float64, nv int, role dosemap.StructureRole) dosemap.Structure {
	s := dosemap.Structure{Name: name, Role: role}
	scale := math.Sqrt(2 * math.Pi / (float64(nv) * math.Sin(2*math.Pi/float64(nv))))
	for z := z0 - math.Ceil((r+z0)/step)*step; z < r; z += step {
		if z <= -r {
			continue
		}
		rho := math.Sqrt(r*r-z*z) * scale
		var ct dosemap.Contour
		for a := 0; a < nv; a++ {
			t := 2 * math.Pi * float64(a) / float64(nv)
			ct.Points = append(ct.Points, dosemap.Vec3{c[0] + rho*math.Cos(t), c[1] + rho*math.Sin(t), c[2] + z})
		}
		s.Contours = append(s.Contours, ct)
	}
	return s
}

func sumOcc(o []float32) float64 {
	var s float64
	for _, x := range o {
		s += float64(x)
	}
	return s
}

// TestOccupancySphereVolume: a sphere r = 10 mm contoured every 1.5 mm has
// volume 4/3·π·r³ = 4188.79 mm³ (computed); the slab model plus
// rasterization must agree within 2 %, on the thermometry grid and on the
// finer analysis grid, for several placements of the sphere on the grid.
func TestOccupancySphereVolume(t *testing.T) {
	want := 4.0 / 3 * math.Pi * 1000
	for _, tc := range []struct {
		name    string
		spacing dosemap.Vec3
		centre  dosemap.Vec3
		z0      float64
	}{
		{"thermometry 1.25x1.25x3 centred", dosemap.Vec3{1.25, 1.25, 3}, dosemap.Vec3{0, 0, 0}, 0},
		{"thermometry 1.25x1.25x3 offset", dosemap.Vec3{1.25, 1.25, 3}, dosemap.Vec3{0.37, -0.41, 1.1}, 0.7},
		{"analysis 1.25x1.25x1 offset", dosemap.Vec3{1.25, 1.25, 1}, dosemap.Vec3{0.6, 0.2, -0.3}, 0.2},
		{"coarse 2.5x2.5x5", dosemap.Vec3{2.5, 2.5, 5}, dosemap.Vec3{0.3, 0.9, 0.4}, 0.5},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := sphereStructure("sphere", tc.centre, 10, 1.5, tc.z0, 128, dosemap.RoleTarget)
			g := dosemap.NewAxialGeometry(40, 40, 20, tc.spacing, dosemap.Vec3{-20 * tc.spacing[0], -20 * tc.spacing[1], -10 * tc.spacing[2]})
			occ, err := Occupancy(&s, g, 1.5)
			if err != nil {
				t.Fatal(err)
			}
			got := sumOcc(occ) * g.VoxelVolume()
			if rel := math.Abs(got-want) / want; rel > 0.02 {
				t.Errorf("volume %.1f mm³, want %.1f within 2 %% (off by %.2f %%)", got, want, 100*rel)
			}
			t.Logf("volume %.1f mm³ vs %.1f (%.2f %%)", got, want, 100*(got-want)/want)
		})
	}
}

// TestOccupancyEvenOdd: a 20x20 mm square with a 10x10 mm square inside it
// on one plane is a frame of area 400-100 = 300 mm² (even-odd rule,
// computed); a third 4x4 square inside the inner one is an island (+16).
func TestOccupancyEvenOdd(t *testing.T) {
	sq := func(h, z float64) dosemap.Contour {
		return dosemap.Contour{Points: []dosemap.Vec3{{-h, -h, z}, {h, -h, z}, {h, h, z}, {-h, h, z}}}
	}
	g := dosemap.NewAxialGeometry(40, 40, 1, dosemap.Vec3{1, 1, 2}, dosemap.Vec3{-19.5, -19.5, 0})
	for _, tc := range []struct {
		name string
		cs   []dosemap.Contour
		want float64 // mm³ with slab thickness 2 mm
	}{
		{"square", []dosemap.Contour{sq(10, 0)}, 400 * 2},
		{"frame", []dosemap.Contour{sq(10, 0), sq(5, 0)}, 300 * 2},
		{"island", []dosemap.Contour{sq(10, 0), sq(5, 0), sq(2, 0)}, 316 * 2},
	} {
		s := dosemap.Structure{Name: tc.name, Contours: tc.cs}
		occ, err := Occupancy(&s, g, 2)
		if err != nil {
			t.Fatal(err)
		}
		// Edges lie on voxel boundaries, so the result is exact up to
		// rounding.
		if got := sumOcc(occ) * g.VoxelVolume(); math.Abs(got-tc.want) > 1e-6*tc.want {
			t.Errorf("%s: %.3f mm³, want %.3f", tc.name, got, tc.want)
		}
	}
}

// TestSlabEnds: three planes 2 mm apart stand for slabs [-1,5) mm: end
// slabs extend half the spacing beyond the end contours (slab model).
func TestSlabEnds(t *testing.T) {
	var s dosemap.Structure
	for _, z := range []float64{0, 2, 4} {
		s.Contours = append(s.Contours, dosemap.Contour{Points: []dosemap.Vec3{{-5, -5, z}, {5, -5, z}, {5, 5, z}, {-5, 5, z}}})
	}
	g := dosemap.NewAxialGeometry(20, 20, 20, dosemap.Vec3{1, 1, 0.5}, dosemap.Vec3{-9.5, -9.5, -3.75})
	occ, err := Occupancy(&s, g, 3)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := sumOcc(occ)*g.VoxelVolume(), 100.0*6; math.Abs(got-want) > 1e-6 {
		t.Errorf("volume %.3f mm³, want %.3f (3 planes x 2 mm)", got, want)
	}
}

func TestOccupancyErrors(t *testing.T) {
	g := dosemap.NewAxialGeometry(4, 4, 4, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	bad := []dosemap.Structure{
		{Name: "empty"},
		{Name: "line", Contours: []dosemap.Contour{{Points: []dosemap.Vec3{{0, 0, 0}, {1, 0, 0}, {2, 0, 0}}}}},
		{Name: "tilted", Contours: []dosemap.Contour{
			{Points: []dosemap.Vec3{{0, 0, 0}, {1, 0, 0}, {1, 1, 0}}},
			{Points: []dosemap.Vec3{{0, 0, 0}, {1, 0, 0}, {1, 0, 1}}}}},
	}
	for _, s := range bad {
		if _, err := Occupancy(&s, g, 1); err == nil {
			t.Errorf("%s: no error", s.Name)
		} else {
			t.Log(err)
		}
	}
}

func randomMask(r *rand.Rand, n int, p float64) []bool {
	m := make([]bool, n)
	for i := range m {
		m[i] = r.Float64() < p
	}
	return m
}

// TestSquaredDistanceBruteForce compares the separable transform with the
// definition (minimum over all feature voxels) on random seeded masks with
// anisotropic spacing. Tolerance 1e-9 mm² (both exact in float64).
func TestSquaredDistanceBruteForce(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 30; trial++ {
		g := dosemap.NewAxialGeometry(1+r.IntN(12), 1+r.IntN(12), 1+r.IntN(8),
			dosemap.Vec3{0.5 + 2*r.Float64(), 0.5 + 2*r.Float64(), 0.5 + 3*r.Float64()}, dosemap.Vec3{})
		p := []float64{0, 0.002, 0.02, 0.2, 0.8}[trial%5]
		mask := randomMask(r, g.Len(), p)
		got := SquaredDistance(g, mask)
		for n := range mask {
			i, j, k := g.IJK(n)
			want := math.Inf(1)
			for m, on := range mask {
				if !on {
					continue
				}
				a, b, c := g.IJK(m)
				dx := float64(i-a) * g.Spacing[0]
				dy := float64(j-b) * g.Spacing[1]
				dz := float64(k-c) * g.Spacing[2]
				want = math.Min(want, dx*dx+dy*dy+dz*dz)
			}
			if !(got[n] == want || math.Abs(got[n]-want) < 1e-9) {
				t.Fatalf("trial %d %v: voxel %d: %g, want %g", trial, g, n, got[n], want)
			}
		}
	}
}

// unionFind labels by merging every adjacent pair (a different algorithm
// from the flood fill).
func unionFind(g dosemap.Geometry, mask []bool, conn Connectivity) []int {
	parent := make([]int, len(mask))
	for n := range parent {
		parent[n] = n
	}
	var find func(int) int
	find = func(x int) int {
		for parent[x] != x {
			parent[x] = parent[parent[x]]
			x = parent[x]
		}
		return x
	}
	for n, on := range mask {
		if !on {
			continue
		}
		i, j, k := g.IJK(n)
		for _, o := range neighbourOffsets(conn) {
			if a, b, c := i+o[0], j+o[1], k+o[2]; g.Contains(a, b, c) && mask[g.Index(a, b, c)] {
				parent[find(n)] = find(g.Index(a, b, c))
			}
		}
	}
	out := make([]int, len(mask))
	for n := range out {
		out[n] = find(n)
	}
	return out
}

// TestComponentsBruteForce: flood-fill labels partition the mask exactly as
// pairwise union-find does, for 6- and 26-connectivity.
func TestComponentsBruteForce(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	for trial := 0; trial < 40; trial++ {
		g := dosemap.NewAxialGeometry(1+r.IntN(10), 1+r.IntN(10), 1+r.IntN(6), dosemap.Vec3{1, 1, 2}, dosemap.Vec3{})
		mask := randomMask(r, g.Len(), 0.1+0.5*r.Float64())
		for _, conn := range []Connectivity{Connect6, Connect26} {
			lab, count := Components(g, mask, conn)
			root := unionFind(g, mask, conn)
			roots := map[int]bool{}
			pair := map[int32]int{}
			for n, on := range mask {
				if !on {
					if lab[n] != 0 {
						t.Fatalf("label outside mask")
					}
					continue
				}
				roots[root[n]] = true
				if p, ok := pair[lab[n]]; ok && p != root[n] {
					t.Fatalf("trial %d conn %d: label %d spans two components", trial, conn, lab[n])
				}
				pair[lab[n]] = root[n]
			}
			if count != len(roots) || len(pair) != count {
				t.Fatalf("trial %d conn %d: %d labels, union-find %d components", trial, conn, count, len(roots))
			}
		}
	}
}

// TestComponentsDiagonal: two voxels touching at a corner are one region
// with 26-connectivity and two with 6 (definition).
func TestComponentsDiagonal(t *testing.T) {
	g := dosemap.NewAxialGeometry(2, 2, 2, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	mask := make([]bool, 8)
	mask[g.Index(0, 0, 0)], mask[g.Index(1, 1, 1)] = true, true
	if _, n := Components(g, mask, Connect26); n != 1 {
		t.Errorf("26: %d regions, want 1", n)
	}
	if _, n := Components(g, mask, Connect6); n != 2 {
		t.Errorf("6: %d regions, want 2", n)
	}
}
