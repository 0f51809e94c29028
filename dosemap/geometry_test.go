package dosemap

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// dicomPixel is the pixel-centre formula of DICOM PS3.3 C.7.6.2.1.1 written
// out independently: P = IPP + col·PixelSpacing[1]·rowCos +
// row·PixelSpacing[0]·colCos, with PixelSpacing = [row spacing, column
// spacing].
func dicomPixel(ipp, rowCos, colCos [3]float64, pixelSpacing [2]float64, col, row float64) [3]float64 {
	var p [3]float64
	for a := 0; a < 3; a++ {
		p[a] = ipp[a] + col*pixelSpacing[1]*rowCos[a] + row*pixelSpacing[0]*colCos[a]
	}
	return p
}

// rotation returns the rotation matrix of angle a about the unit axis u
// (Rodrigues' formula).
func rotation(u Vec3, a float64) mat3 {
	c, s := math.Cos(a), math.Sin(a)
	var r mat3
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			d := 0.0
			if i == j {
				d = 1
			}
			r[i][j] = c*d + (1-c)*u[i]*u[j]
		}
	}
	r[0][1] -= s * u[2]
	r[0][2] += s * u[1]
	r[1][0] += s * u[2]
	r[1][2] -= s * u[0]
	r[2][0] -= s * u[1]
	r[2][1] += s * u[0]
	return r
}

// mat3 is a 3×3 matrix by rows.
type mat3 [3]Vec3

func (r mat3) apply(v Vec3) Vec3 { return Vec3{r[0].Dot(v), r[1].Dot(v), r[2].Dot(v)} }

// randomGeometry returns a seeded oblique grid with unequal spacings.
func randomGeometry(rng *rand.Rand) Geometry {
	u := Vec3{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}.Unit()
	r := rotation(u, rng.Float64()*2*math.Pi)
	g := Geometry{
		Cols: 2 + rng.IntN(40), Rows: 2 + rng.IntN(40), Slices: 1 + rng.IntN(8),
		Spacing: Vec3{0.3 + 2*rng.Float64(), 0.3 + 2*rng.Float64(), 1 + 4*rng.Float64()},
		Origin:  Vec3{200 * (rng.Float64() - 0.5), 200 * (rng.Float64() - 0.5), 200 * (rng.Float64() - 0.5)},
		Row:     r.apply(Vec3{1, 0, 0}), Col: r.apply(Vec3{0, 1, 0}), Normal: r.apply(Vec3{0, 0, 1}),
	}
	switch rng.IntN(3) {
	case 1: // left-handed stack
		g.Normal = g.Normal.Scale(-1)
	case 2: // tilted stack (gantry tilt of up to ~20°): Normal not ⟂ plane
		g.Normal = g.Normal.Add(g.Row.Scale(0.35 * (rng.Float64() - 0.5))).Unit()
	}
	return g
}

func TestPointMatchesDICOM(t *testing.T) {
	// MR_small.dcm of pydicom's test files (testdata/check-values.md): IPP
	// (-83.9063, -91.2, 6.6406), PixelSpacing 0.3125, axial; and an oblique
	// plane with unequal row/column spacing. Reference: PS3.3 C.7.6.2.1.1;
	// tolerance 1e-9 mm (double rounding).
	r := rotation(Vec3{1, 2, 3}.Unit(), 0.7)
	cases := []struct {
		name           string
		ipp            [3]float64
		rowCos, colCos [3]float64
		ps             [2]float64 // [row spacing, column spacing]
	}{
		{"MR_small axial", [3]float64{-83.9063, -91.2, 6.6406}, [3]float64{1, 0, 0}, [3]float64{0, 1, 0}, [2]float64{0.3125, 0.3125}},
		{"oblique, 0.8×1.25 mm", [3]float64{10, -20, 30}, r.apply(Vec3{1, 0, 0}), r.apply(Vec3{0, 1, 0}), [2]float64{0.8, 1.25}},
		{"sagittal", [3]float64{0, -100, 100}, [3]float64{0, 1, 0}, [3]float64{0, 0, -1}, [2]float64{1.5, 0.9}},
	}
	for _, c := range cases {
		g := Geometry{Cols: 64, Rows: 48, Slices: 3,
			Spacing: Vec3{c.ps[1], c.ps[0], 2}, Origin: c.ipp,
			Row: c.rowCos, Col: c.colCos, Normal: Vec3(c.rowCos).Cross(c.colCos)}
		if err := g.Validate(); err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		for _, ij := range [][2]float64{{0, 0}, {63, 0}, {0, 47}, {17, 33}, {2.5, 7.25}} {
			want := dicomPixel(c.ipp, c.rowCos, c.colCos, c.ps, ij[0], ij[1])
			got := g.Point(ij[0], ij[1], 0)
			if Vec3(want).Sub(got).Norm() > 1e-9 {
				t.Errorf("%s: pixel (col %g, row %g) at %v, want %v", c.name, ij[0], ij[1], got, want)
			}
			// Slice k: IPP of slice k is IPP + k·spacing·normal.
			ipp2 := Vec3(c.ipp).Add(g.Normal.Scale(2 * 2))
			want2 := dicomPixel(ipp2, c.rowCos, c.colCos, c.ps, ij[0], ij[1])
			if Vec3(want2).Sub(g.Point(ij[0], ij[1], 2)).Norm() > 1e-9 {
				t.Errorf("%s: slice 2 pixel mismatch", c.name)
			}
		}
	}
}

func TestVoxelRoundTrip(t *testing.T) {
	// Voxel is the exact inverse of Point for oblique, left-handed and tilted
	// grids (seeded); tolerance 1e-9 voxels (double rounding on coordinates
	// of ~100 mm).
	rng := rand.New(rand.NewPCG(42, 7))
	for range 200 {
		g := randomGeometry(rng)
		if err := g.Validate(); err != nil {
			t.Fatalf("%v: %v", g, err)
		}
		for range 20 {
			i := (rng.Float64()*1.4 - 0.2) * float64(g.Cols)
			j := (rng.Float64()*1.4 - 0.2) * float64(g.Rows)
			k := (rng.Float64()*1.4 - 0.2) * float64(g.Slices)
			p := g.Point(i, j, k)
			a, b, c := g.Voxel(p)
			if math.Abs(a-i) > 1e-9 || math.Abs(b-j) > 1e-9 || math.Abs(c-k) > 1e-9 {
				t.Fatalf("%v: Voxel(Point(%g, %g, %g)) = (%g, %g, %g)", g, i, j, k, a, b, c)
			}
			if q := g.Point(a, b, c); q.Sub(p).Norm() > 1e-9 {
				t.Fatalf("Point(Voxel(p)) = %v, p = %v", q, p)
			}
		}
		for n := 0; n < g.Len(); n += 1 + g.Len()/50 {
			i, j, k := g.IJK(n)
			if !g.Contains(i, j, k) || g.Index(i, j, k) != n {
				t.Fatalf("IJK(%d) = (%d, %d, %d) does not map back", n, i, j, k)
			}
		}
	}
	// A degenerate grid has no inverse.
	g := NewAxialGeometry(4, 4, 4, Vec3{1, 1, 1}, Vec3{})
	g.Normal = g.Row
	if i, _, _ := g.Voxel(Vec3{1, 2, 3}); !math.IsNaN(i) {
		t.Error("Voxel of a degenerate grid is not NaN")
	}
}

func TestValidate(t *testing.T) {
	ok := NewAxialGeometry(4, 3, 2, Vec3{1, 1, 2}, Vec3{})
	if err := ok.Validate(); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		edit func(*Geometry)
		want string
	}{
		{"zero size", func(g *Geometry) { g.Rows = 0 }, "not positive"},
		{"zero spacing", func(g *Geometry) { g.Spacing[2] = 0 }, "spacing"},
		{"NaN spacing", func(g *Geometry) { g.Spacing[0] = math.NaN() }, "spacing"},
		{"long row", func(g *Geometry) { g.Row = Vec3{2, 0, 0} }, "unit vector"},
		{"skew", func(g *Geometry) { g.Col = Vec3{0.6, 0.8, 0} }, "orthogonal"},
		{"in-plane normal", func(g *Geometry) { g.Normal = Vec3{0, 1, 0} }, "image plane"},
	}
	for _, c := range cases {
		g := ok
		c.edit(&g)
		err := g.Validate()
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one about %q", c.name, err, c.want)
		}
	}
}

func TestSameGrid(t *testing.T) {
	// Two affine grids agree everywhere within tol iff they agree at the
	// corners (the distance is convex in the voxel coordinate).
	g := NewAxialGeometry(100, 80, 10, Vec3{1, 1, 3}, Vec3{-50, -40, 0})
	shift := g
	shift.Origin[0] += 0.005
	tilt := g // rotated by 1e-4 rad about z: 0.01 mm at 100 mm from the origin
	r := rotation(Vec3{0, 0, 1}, 1e-4)
	tilt.Row, tilt.Col = r.apply(g.Row), r.apply(g.Col)
	bigger := g
	bigger.Slices++
	cases := []struct {
		name string
		o    Geometry
		tol  float64
		want bool
	}{
		{"identical", g, 0, true},
		{"shift 0.005 mm, tol 0.01", shift, 0.01, true},
		{"shift 0.005 mm, tol 0.001", shift, 0.001, false},
		{"tilt: far corner moves 0.0127 mm, tol 0.02", tilt, 0.02, true},
		{"tilt: far corner moves 0.0127 mm, tol 0.01", tilt, 0.01, false},
		{"other size", bigger, 1, false},
	}
	for _, c := range cases {
		if got := g.SameGrid(c.o, c.tol); got != c.want {
			t.Errorf("%s: SameGrid = %v, want %v", c.name, got, c.want)
		}
	}
}
