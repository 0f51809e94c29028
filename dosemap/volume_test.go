package dosemap

import (
	"math"
	"math/rand/v2"
	"testing"
)

// linearField fills v with f(P) = c + a·P at every voxel centre.
func linearField(v *Volume, a Vec3, c float64) {
	for n := range v.Data {
		v.Data[n] = float32(c + a.Dot(voxelPoint(v.Geometry, n)))
	}
}

func TestResampleLinearExact(t *testing.T) {
	// Trilinear interpolation reproduces a field linear in position exactly
	// (it is exact on affine functions of each voxel coordinate, and the
	// map from patient mm to voxel coordinates is affine). Destination:
	// oblique grids lying inside the source, seeded. Tolerance 2e-4 on
	// values ~100 (float32 storage, 2^-24·100 ≈ 6e-6 per value, plus
	// rounding in interpolation).
	rng := rand.New(rand.NewPCG(5, 5))
	src := NewVolume(NewAxialGeometry(40, 36, 12, Vec3{1.5, 1.2, 2.5}, Vec3{-30, -20, -15}))
	a := Vec3{0.7, -0.4, 1.1}
	linearField(src, a, 20)
	centre := src.Point(19.5, 17.5, 5.5)
	for trial := 0; trial < 20; trial++ {
		u := Vec3{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}.Unit()
		r := rotation(u, rng.Float64()*math.Pi)
		dst := Geometry{Cols: 10, Rows: 9, Slices: 4, Spacing: Vec3{1.1, 0.9, 1.7},
			Row: r.apply(Vec3{1, 0, 0}), Col: r.apply(Vec3{0, 1, 0}), Normal: r.apply(Vec3{0, 0, 1})}
		dst.Origin = centre.Sub(dst.Point(4.5, 4, 1.5)) // centred on the source
		out := Resample(src, dst)
		for n, v := range out.Data {
			want := 20 + a.Dot(voxelPoint(dst, n))
			if math.Abs(float64(v)-want) > 2e-4 {
				t.Fatalf("trial %d voxel %d: %g, want %g", trial, n, v, want)
			}
		}
	}
}

func TestResampleAlignedIsExact(t *testing.T) {
	// Resampling onto the same grid, or onto a grid shifted by whole voxels,
	// copies values bit for bit and keeps every NaN where it was: rounding
	// in the patient-space round trip (~1e-13 voxel) must neither blend
	// neighbours nor spread NaN.
	rng := rand.New(rand.NewPCG(9, 9))
	for trial := 0; trial < 20; trial++ {
		g := randomGeometry(rng)
		src := NewVolume(g)
		for n := range src.Data {
			src.Data[n] = float32(rng.NormFloat64())
			if rng.IntN(7) == 0 {
				src.Data[n] = float32(math.NaN())
			}
		}
		same := Resample(src, g)
		sub := g
		sub.Cols, sub.Rows = max(1, g.Cols-1), max(1, g.Rows-1)
		sub.Origin = g.Point(1, 1, 0)
		shifted := Resample(src, sub)
		for n, v := range same.Data {
			w := src.Data[n]
			if !(v == w || v != v && w != w) {
				t.Fatalf("%v: identity resample changed voxel %d: %g → %g", g, n, w, v)
			}
		}
		for n, v := range shifted.Data {
			i, j, k := sub.IJK(n)
			if i+1 >= g.Cols || j+1 >= g.Rows {
				continue
			}
			w := src.At(i+1, j+1, k)
			if !(v == w || v != v && w != w) {
				t.Fatalf("shift by one voxel: (%d, %d, %d) = %g, want %g", i, j, k, v, w)
			}
		}
	}
}

func TestResampleOutsideIsNaN(t *testing.T) {
	// A destination half outside the source: voxels beyond half a voxel of
	// the outermost source centres are NaN (not monitored), never zero;
	// those within take the edge value (the edge voxel's extent).
	src := NewVolume(NewAxialGeometry(10, 10, 3, Vec3{1, 1, 2}, Vec3{})).Fill(5)
	dst := NewAxialGeometry(20, 1, 1, Vec3{0.5, 1, 1}, Vec3{4.6, 2, 2})
	out := Resample(src, dst)
	for i, v := range out.Data {
		x := 4.6 + 0.5*float64(i)
		switch {
		case x <= 9.5:
			if v != 5 {
				t.Errorf("x = %g mm inside: %g, want 5", x, v)
			}
		default:
			if !math.IsNaN(float64(v)) {
				t.Errorf("x = %g mm outside: %g, want NaN", x, v)
			}
		}
	}
	// Outside along the slice axis too, including one-slice grids.
	flat := NewVolume(NewAxialGeometry(4, 4, 1, Vec3{1, 1, 3}, Vec3{})).Fill(2)
	for _, c := range []struct {
		z    float64
		want float64
	}{{0, 2}, {1.4, 2}, {-1.5, 2}, {1.6, math.NaN()}, {-3, math.NaN()}} {
		got := float64(flat.Sample(Vec3{1, 1, c.z}))
		if !(got == c.want || math.IsNaN(got) && math.IsNaN(c.want)) {
			t.Errorf("one-slice grid at z = %g: %g, want %g", c.z, got, c.want)
		}
	}
}

func TestSampleNaNPropagates(t *testing.T) {
	// A NaN voxel makes every interpolation with a non-zero weight on it NaN
	// and leaves the others untouched (NaN is missing data, never zero).
	v := NewVolume(NewAxialGeometry(5, 5, 3, Vec3{1, 1, 1}, Vec3{}))
	linearField(v, Vec3{1, 2, 3}, 0)
	v.Set(2, 2, 1, float32(math.NaN()))
	cases := []struct {
		i, j, k float64
		nan     bool
	}{
		{2, 2, 1, true},
		{1.5, 2, 1, true},
		{2.9, 2.9, 0.1, true},
		{1, 2, 1, false},       // at a neighbour's centre: weight 0 on the NaN
		{3.2, 2.5, 1.5, false}, // cell not touching (2, 2, 1)
		{1.5, 1.5, 0.5, true},
	}
	for _, c := range cases {
		got := v.SampleVoxel(c.i, c.j, c.k)
		if math.IsNaN(float64(got)) != c.nan {
			t.Errorf("(%g, %g, %g): %g, NaN expected %v", c.i, c.j, c.k, got, c.nan)
		}
		if !c.nan {
			want := c.i + 2*c.j + 3*c.k
			if math.Abs(float64(got)-want) > 1e-5 {
				t.Errorf("(%g, %g, %g): %g, want %g", c.i, c.j, c.k, got, want)
			}
		}
	}
	if !math.IsNaN(float64(v.SampleVoxel(math.NaN(), 0, 0))) {
		t.Error("NaN coordinate does not give NaN")
	}
}

func TestVolumeAccessors(t *testing.T) {
	v := NewVolume(NewAxialGeometry(3, 2, 2, Vec3{1, 1, 1}, Vec3{}))
	v.Set(2, 1, 1, 7)
	if v.Data[(1*2+1)*3+2] != 7 || v.At(2, 1, 1) != 7 {
		t.Error("Set/At do not use index (k*Rows+j)*Cols+i")
	}
	c := v.Clone()
	c.Data[0] = 1
	if v.Data[0] != 0 {
		t.Error("Clone shares data")
	}
	if err := v.Check(); err != nil {
		t.Error(err)
	}
	v.Data = v.Data[:5]
	if err := v.Check(); err == nil {
		t.Error("short data not reported")
	}
	defer func() {
		if recover() == nil {
			t.Error("At outside the grid did not panic")
		}
	}()
	c.At(3, 0, 0)
}

// TestResampleBoxMatchesEveryVoxel: Resample samples only the box of the
// source grid; an oblique one-slice plane (3 mm thick, turned 30° about
// two axes) resampled onto a 1 mm volume must give what sampling every
// voxel of the volume gives (reference: SampleVoxel at every voxel centre
// of the destination, the definition of Resample; values to 1e-5 °C for
// the different rounding of the affine steps, NaN where it is NaN).
func TestResampleBoxMatchesEveryVoxel(t *testing.T) {
	c30, s30 := math.Cos(math.Pi/6), math.Sin(math.Pi/6)
	row := Vec3{c30, s30, 0}
	col := Vec3{-s30 * c30, c30 * c30, s30}
	g := Geometry{Cols: 24, Rows: 20, Slices: 1, Spacing: Vec3{1.25, 1.25, 3}, Row: row, Col: col, Normal: row.Cross(col), Origin: Vec3{-12, -10, 3}}
	src := NewVolume(g)
	for n := range src.Data {
		i, j, _ := g.IJK(n)
		src.Data[n] = float32(37 + 0.3*float64(i) - 0.2*float64(j))
	}
	dst := NewAxialGeometry(40, 36, 30, Vec3{1, 1, 1}, Vec3{-20, -18, -12})
	out := Resample(src, dst)
	inside := 0
	for n, got := range out.Data {
		i, j, k := dst.IJK(n)
		a, b, c := src.Voxel(dst.Point(float64(i), float64(j), float64(k)))
		want := src.SampleVoxel(a, b, c)
		switch {
		case want != want:
			if got == got {
				t.Fatalf("voxel %d,%d,%d: %g, want NaN", i, j, k, got)
			}
		case !(math.Abs(float64(got-want)) <= 1e-5):
			t.Fatalf("voxel %d,%d,%d: %g, want %g", i, j, k, got, want)
		default:
			inside++
		}
	}
	if inside < 100 {
		t.Fatalf("only %d voxels inside the plane: the test plane misses the volume", inside)
	}
}

// TestTapsMatchSampleVoxel: the voxels and weights Taps returns give
// SampleVoxel's trilinear value (the definition of trilinear
// interpolation, common practice) at random points of a random volume,
// inside, near the edges and outside, on a 3-D grid and a one-slice
// grid; weights are positive and sum to 1 (float rounding, 1e-12).
func TestTapsMatchSampleVoxel(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for _, g := range []Geometry{
		NewAxialGeometry(6, 5, 4, Vec3{1, 1.5, 3}, Vec3{-2, 3, 1}),
		NewAxialGeometry(7, 6, 1, Vec3{1.2, 1.2, 3}, Vec3{0, 0, 0}),
	} {
		v := NewVolume(g)
		for n := range v.Data {
			v.Data[n] = float32(rng.Float64()*10 - 5)
		}
		var idx [8]int
		var w [8]float64
		for trial := 0; trial < 2000; trial++ {
			i := rng.Float64()*float64(g.Cols+1) - 1
			j := rng.Float64()*float64(g.Rows+1) - 1
			k := rng.Float64()*float64(g.Slices+1) - 1
			if trial%7 == 0 {
				i = math.Round(i) // voxel centres
			}
			n := g.Taps(i, j, k, &idx, &w)
			want := v.SampleVoxel(i, j, k)
			if n == 0 {
				if want == want {
					t.Fatalf("(%g, %g, %g): no taps, SampleVoxel %g", i, j, k, want)
				}
				continue
			}
			var sum, ws float64
			for a := 0; a < n; a++ {
				if !(w[a] > 0) {
					t.Fatalf("(%g, %g, %g): weight %g", i, j, k, w[a])
				}
				sum += w[a] * float64(v.Data[idx[a]])
				ws += w[a]
			}
			if math.Abs(ws-1) > 1e-12 || math.Abs(float64(float32(sum))-float64(want)) > 1e-5 {
				t.Fatalf("(%g, %g, %g): taps give %g (weights %g), SampleVoxel %g", i, j, k, sum, ws, want)
			}
		}
	}
}
