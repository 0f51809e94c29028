package view

import (
	"math"
	"math/rand/v2"
	"testing"

	"dosecover/dosemap"
)

// obliqueGeometry returns a rotated, anisotropic grid (rotation about an
// oblique axis) for sampling tests.
func obliqueGeometry() dosemap.Geometry {
	// Rotation by 20° about z then 15° about x, applied to the axial axes.
	c1, s1 := math.Cos(20*math.Pi/180), math.Sin(20*math.Pi/180)
	c2, s2 := math.Cos(15*math.Pi/180), math.Sin(15*math.Pi/180)
	rot := func(v dosemap.Vec3) dosemap.Vec3 {
		v = dosemap.Vec3{c1*v[0] - s1*v[1], s1*v[0] + c1*v[1], v[2]}
		return dosemap.Vec3{v[0], c2*v[1] - s2*v[2], s2*v[1] + c2*v[2]}
	}
	return dosemap.Geometry{
		Cols: 23, Rows: 19, Slices: 7,
		Spacing: dosemap.Vec3{1.1, 0.9, 2.5},
		Origin:  dosemap.Vec3{-12, 5, 30},
		Row:     rot(dosemap.Vec3{1, 0, 0}), Col: rot(dosemap.Vec3{0, 1, 0}), Normal: rot(dosemap.Vec3{0, 0, 1}),
	}
}

func randomVolume(g dosemap.Geometry, seed uint64, nanFrac float64) *dosemap.Volume {
	rng := rand.New(rand.NewPCG(seed, 7))
	v := dosemap.NewVolume(g)
	for n := range v.Data {
		v.Data[n] = float32(rng.Float64()*200 - 50)
		if rng.Float64() < nanFrac {
			v.Data[n] = float32(math.NaN())
		}
	}
	return v
}

// TestSampleMatchesVolumeSample checks the affine-stepping sampler against
// dosemap.Volume.SampleVoxel (the reference trilinear interpolation) at every
// pixel of acquisition, reformatted and random oblique planes, NaN and the
// half-voxel edge rule included. Tolerance 1e-4 relative: float32 storage
// of values up to 150 and float64 arithmetic in both.
func TestSampleMatchesVolumeSample(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, c := range []struct {
		name string
		g    dosemap.Geometry
		nan  float64
	}{
		{"axial", dosemap.NewAxialGeometry(17, 13, 5, dosemap.Vec3{1, 1.5, 3}, dosemap.Vec3{-8, -9, -6}), 0},
		{"oblique", obliqueGeometry(), 0},
		{"oblique with NaN", obliqueGeometry(), 0.03},
		{"one slice", dosemap.NewAxialGeometry(11, 9, 1, dosemap.Vec3{2, 2, 4}, dosemap.Vec3{0, 0, 0}), 0.02},
	} {
		vol := randomVolume(c.g, 11, c.nan)
		centre := c.g.Point(float64(c.g.Cols-1)/2, float64(c.g.Rows-1)/2, float64(c.g.Slices-1)/2)
		planes := []Plane{
			AcquisitionPlane(c.g, c.g.Slices/2),
			PlaneThrough(c.g, RowNormal, centre, 0),
			PlaneThrough(c.g, ColNormal, centre, 0.7),
		}
		for n := 0; n < 4; n++ {
			u := dosemap.Vec3{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
			w := dosemap.Vec3{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
			q := centre.Add(dosemap.Vec3{rng.NormFloat64() * 3, rng.NormFloat64() * 3, rng.NormFloat64() * 3})
			p, err := ObliquePlane(c.g, q, u, w, 0.8)
			if err != nil {
				t.Fatal(err)
			}
			planes = append(planes, p)
		}
		for pn, p := range planes {
			got := Sample(vol, p)
			valid := 0
			for y := 0; y < p.Height; y++ {
				for x := 0; x < p.Width; x++ {
					// Volume.SampleVoxel at the voxel coordinate snapped
					// as SampleInto documents.
					i, j, k := vol.Voxel(p.Point(float64(x), float64(y)))
					want := vol.SampleVoxel(snap(i), snap(j), snap(k))
					g := got[y*p.Width+x]
					if math.IsNaN(float64(want)) != math.IsNaN(float64(g)) ||
						math.Abs(float64(g-want)) > 1e-4*150 {
						t.Fatalf("%s plane %d pixel (%d,%d): got %g, Volume.Sample %g", c.name, pn, x, y, g, want)
					}
					if !math.IsNaN(float64(g)) {
						valid++
					}
				}
			}
			if valid == 0 && pn < 3 { // random planes may miss a one-slice grid
				t.Errorf("%s plane %d: no pixel inside the volume", c.name, pn)
			}
		}
	}
}

// TestAcquisitionPlaneReproducesSlice: the acquisition plane's samples are
// the stored voxels of that slice (DICOM PS3.3 C.7.6.2.1.1 pixel centres),
// exactly.
func TestAcquisitionPlaneReproducesSlice(t *testing.T) {
	g := obliqueGeometry()
	vol := randomVolume(g, 5, 0.05)
	for k := 0; k < g.Slices; k++ {
		p := AcquisitionPlane(g, k)
		got := Sample(vol, p)
		for j := 0; j < g.Rows; j++ {
			for i := 0; i < g.Cols; i++ {
				want := vol.At(i, j, k)
				if g := got[j*g.Cols+i]; !(g == want || (g != g && want != want)) {
					t.Fatalf("slice %d voxel (%d,%d): got %g want %g", k, i, j, g, want)
				}
			}
		}
		// PlaneThrough a voxel centre of slice k gives the same plane.
		q := PlaneThrough(g, Acquisition, g.Point(3, 4, float64(k)), 0)
		if q.Width != p.Width || q.Height != p.Height || q.Origin.Sub(p.Origin).Norm() > 1e-9 {
			t.Errorf("slice %d: PlaneThrough %+v differs from AcquisitionPlane %+v", k, q, p)
		}
	}
}

// TestPlaneMapping checks Point and Pixel are inverse and that the
// reformats of an axial stack take the usual display orientation: coronal
// with patient left to the right and inferior down, sagittal with
// posterior to the right and inferior down (common practice).
func TestPlaneMapping(t *testing.T) {
	g := dosemap.NewAxialGeometry(40, 30, 12, dosemap.Vec3{1, 1, 2.5}, dosemap.Vec3{-20, -15, -10})
	q := dosemap.Vec3{1.3, -2.2, 4.1}
	for _, c := range []struct {
		o     Orientation
		u, v  dosemap.Vec3
		w, h  int
		pixel float64
	}{
		{Acquisition, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, 1, 0}, 40, 30, 1},
		{RowNormal, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, 0, -1}, 40, 30, 1}, // 30 mm of slices / 1 mm
		{ColNormal, dosemap.Vec3{0, 1, 0}, dosemap.Vec3{0, 0, -1}, 30, 30, 1},
	} {
		p := PlaneThrough(g, c.o, q, 0)
		if p.U != c.u || p.V != c.v {
			t.Errorf("%v: axes %v %v, want %v %v", c.o, p.U, p.V, c.u, c.v)
		}
		if p.Width != c.w || p.Height != c.h || p.PixelU != c.pixel {
			t.Errorf("%v: %d×%d px of %g mm, want %d×%d of %g", c.o, p.Width, p.Height, p.PixelU, c.w, c.h, c.pixel)
		}
		if d := p.Distance(q); math.Abs(d) > 1e-9 {
			t.Errorf("%v: plane misses the point by %g mm", c.o, d)
		}
		for _, xy := range [][2]float64{{0, 0}, {3.5, 7.25}, {-2, 40}} {
			x, y := p.Pixel(p.Point(xy[0], xy[1]))
			if math.Abs(x-xy[0]) > 1e-9 || math.Abs(y-xy[1]) > 1e-9 {
				t.Errorf("%v: Pixel(Point(%v)) = %g, %g", c.o, xy, x, y)
			}
		}
		if err := p.Validate(); err != nil {
			t.Error(err)
		}
	}
	if _, err := ObliquePlane(g, q, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{2, 0, 0}, 0); err == nil {
		t.Error("ObliquePlane accepted parallel axes")
	}
	if err := (Plane{Width: 3, Height: 3, PixelU: 1, PixelV: 1, U: dosemap.Vec3{1, 0, 0}, V: dosemap.Vec3{1, 0, 0}}).Validate(); err == nil {
		t.Error("Validate accepted parallel axes")
	}
}
