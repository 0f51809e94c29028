package view

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"dosecover/dosemap"
)

// signedArea returns the shoelace area of a closed polyline in screen
// coordinates (y down): negative for a path that runs anticlockwise on
// screen.
func signedArea(pts []Point) float64 {
	var a float64
	for n := range pts {
		p, q := pts[n], pts[(n+1)%len(pts)]
		a += p.X*q.Y - q.X*p.Y
	}
	return a / 2
}

// TestIsolineCircles traces radially symmetric fields whose isolines are
// circles of known radius: f = r² at level R² (radius R), and the Gaussian
// f = exp(-r²/(2σ²)) at level L (radius σ·sqrt(-2 ln L)). Every vertex must
// lie within 0.05 pixel of the circle. Reference: the exact radius
// (computed). Tolerance: linear interpolation of f along a cell edge errs
// by at most h²/8·|f”| (h = 1 pixel), which for these radii and widths is
// below 0.035 pixel of radius; 0.05 leaves room for rounding.
func TestIsolineCircles(t *testing.T) {
	for _, c := range []struct {
		name   string
		cx, cy float64
		f      func(r2 float64) float64
		level  float64
		radius float64
		max    bool // field has its maximum at the centre
	}{
		{"r² R=4", 20.3, 19.7, func(r2 float64) float64 { return r2 }, 16, 4, false},
		{"r² R=7.5", 21.1, 18.45, func(r2 float64) float64 { return r2 }, 56.25, 7.5, false},
		{"r² R=15", 19.5, 20.5, func(r2 float64) float64 { return r2 }, 225, 15, false},
		{"gauss σ=6 L=0.5", 20.25, 20.8, func(r2 float64) float64 { return math.Exp(-r2 / 72) }, 0.5, 6 * math.Sqrt(-2*math.Log(0.5)), true},
		{"gauss σ=6 L=0.1", 19.9, 20.1, func(r2 float64) float64 { return math.Exp(-r2 / 72) }, 0.1, 6 * math.Sqrt(-2*math.Log(0.1)), true},
		{"gauss σ=8 L=0.8", 20.6, 19.3, func(r2 float64) float64 { return math.Exp(-r2 / 128) }, 0.8, 8 * math.Sqrt(-2*math.Log(0.8)), true},
	} {
		t.Run(c.name, func(t *testing.T) {
			const w, h = 41, 40
			vals := make([]float32, w*h)
			for y := 0; y < h; y++ {
				for x := 0; x < w; x++ {
					dx, dy := float64(x)-c.cx, float64(y)-c.cy
					vals[y*w+x] = float32(c.f(dx*dx + dy*dy))
				}
			}
			lines := MarchingSquares(vals, w, h, c.level)
			if len(lines) != 1 || !lines[0].Closed {
				t.Fatalf("got %d lines (first closed: %v), want one closed circle", len(lines), len(lines) > 0 && lines[0].Closed)
			}
			worst := 0.0
			for _, p := range lines[0].Pixels {
				d := math.Abs(math.Hypot(p.X-c.cx, p.Y-c.cy) - c.radius)
				worst = math.Max(worst, d)
			}
			if worst > 0.05 {
				t.Errorf("vertex off the circle of radius %.4f by %.4f pixel (tolerance 0.05)", c.radius, worst)
			}
			// Orientation: inside (>= level) on the left on screen.
			a := signedArea(lines[0].Pixels)
			// The vertices span an inscribed polygon, up to ~3 % smaller
			// than the disc for R = 4 with chords up to √2 pixel.
			if want := math.Pi * c.radius * c.radius; math.Abs(math.Abs(a)-want) > 0.04*want {
				t.Errorf("enclosed area %.2f, want πR² = %.2f within 4 %%", math.Abs(a), want)
			}
			if c.max != (a < 0) {
				t.Errorf("signed area %.2f: inside is not on the left of the direction of travel", a)
			}
		})
	}
}

// TestIsolineSaddle checks the asymptotic decider (Nielson & Hamann 1991)
// on the 2×2 saddle v00 = v11 = 1, v10 = v01 = 0, whose bilinear
// interpolant has the saddle value (1·1 - 0·0)/(1+1-0-0) = 0.5 (computed):
// at level 0.6 the two high corners are separated (two lines cutting off
// (0,0) and (1,1)); at level 0.4 they are joined (lines cutting off (1,0)
// and (0,1)).
func TestIsolineSaddle(t *testing.T) {
	vals := []float32{1, 0, 0, 1} // (0,0)=1 (1,0)=0 / (0,1)=0 (1,1)=1
	for _, c := range []struct {
		level   float64
		corners [2]Point // the corners the two lines cut off
	}{
		{0.6, [2]Point{{0, 0}, {1, 1}}},
		{0.4, [2]Point{{1, 0}, {0, 1}}},
	} {
		lines := MarchingSquares(vals, 2, 2, c.level)
		if len(lines) != 2 {
			t.Fatalf("level %g: %d lines, want 2", c.level, len(lines))
		}
		for _, l := range lines {
			if l.Closed || len(l.Pixels) != 2 {
				t.Fatalf("level %g: line %+v, want an open segment", c.level, l)
			}
			mid := Point{(l.Pixels[0].X + l.Pixels[1].X) / 2, (l.Pixels[0].Y + l.Pixels[1].Y) / 2}
			near := false
			for _, k := range c.corners {
				if math.Hypot(mid.X-k.X, mid.Y-k.Y) < 0.5 {
					near = true
				}
			}
			if !near {
				t.Errorf("level %g: segment %v cuts off the wrong corner (want %v)", c.level, l.Pixels, c.corners)
			}
		}
	}
}

// TestIsolineOpenEnds: lines end at the grid border and next to NaN
// samples. A circle r² = 64 centred at x = 22.3 is cut by a NaN column at
// x = 20 and by the right border x = 29: one arc left of the column and
// two right of it (above and below), all open, each end on a cell edge
// touching the NaN column or on the border.
func TestIsolineOpenEnds(t *testing.T) {
	const w, h = 30, 30
	cx, cy := 22.3, 14.6
	vals := make([]float32, w*h)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			dx, dy := float64(x)-cx, float64(y)-cy
			vals[y*w+x] = float32(dx*dx + dy*dy)
			if x == 20 {
				vals[y*w+x] = float32(math.NaN())
			}
		}
	}
	lines := MarchingSquares(vals, w, h, 64)
	if len(lines) != 3 {
		t.Fatalf("%d lines, want 3 open arcs", len(lines))
	}
	for _, l := range lines {
		if l.Closed {
			t.Errorf("arc closed")
		}
		for _, e := range []Point{l.Pixels[0], l.Pixels[len(l.Pixels)-1]} {
			nearNaN := math.Abs(e.X-19) < 1e-9 || math.Abs(e.X-21) < 1e-9
			border := e.X == w-1 || e.Y == 0 || e.Y == h-1
			if !nearNaN && !border {
				t.Errorf("open end %v neither at the border nor next to the NaN column", e)
			}
		}
	}
}

// TestIsolineRandomTopology: on seeded random fields every closed line
// has at least 3 distinct points and no two lines share a vertex (each
// edge crossing belongs to exactly one line), and the number of crossings
// equals the number of sign-changing edges (computed by counting).
func TestIsolineRandomTopology(t *testing.T) {
	rng := rand.New(rand.NewPCG(42, 1))
	for trial := 0; trial < 20; trial++ {
		w, h := 5+rng.IntN(30), 5+rng.IntN(30)
		vals := make([]float32, w*h)
		for n := range vals {
			vals[n] = float32(rng.Float64())
		}
		lines := MarchingSquares(vals, w, h, 0.5)
		seen := map[string]bool{}
		total := 0
		for _, l := range lines {
			if l.Closed && len(l.Pixels) < 3 {
				t.Errorf("trial %d: closed line of %d points", trial, len(l.Pixels))
			}
			for _, p := range l.Pixels {
				k := fmt.Sprintf("%.9f,%.9f", p.X, p.Y)
				if seen[k] {
					t.Fatalf("trial %d: crossing %s used twice", trial, k)
				}
				seen[k] = true
				total++
			}
		}
		want := 0
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				in := vals[y*w+x] >= 0.5
				if x+1 < w && (vals[y*w+x+1] >= 0.5) != in {
					want++
				}
				if y+1 < h && (vals[(y+1)*w+x] >= 0.5) != in {
					want++
				}
			}
		}
		if total != want {
			t.Errorf("trial %d: %d vertices, want %d sign-changing edges", trial, total, want)
		}
	}
}

// TestPlaneIsolineSphere samples f = |p - c|² (mm²) on an oblique grid,
// cuts it with an oblique plane at distance d from c and traces the level
// R²: the patient-space vertices must lie on the sphere of radius R and in
// the plane. Reference: the sphere (computed). Tolerance 0.1 mm (voxels of
// 1.1×0.9×2.5 mm): trilinear interpolation of r² errs by at most
// Σh²/4 = 2.1 mm² in f, i.e. 0.05 mm of radius at R = 20 mm, and the
// marching-squares interpolation adds less than 0.01 mm.
func TestPlaneIsolineSphere(t *testing.T) {
	g := obliqueGeometry()
	g.Cols, g.Rows, g.Slices = 60, 60, 24
	c := g.Point(30, 28, 11.5)
	vol := dosemap.NewVolume(g)
	for n := range vol.Data {
		i, j, k := g.IJK(n)
		d := g.Point(float64(i), float64(j), float64(k)).Sub(c)
		vol.Data[n] = float32(d.Dot(d))
	}
	const R = 20.0
	for _, d := range []float64{0, 5, 12} {
		u := dosemap.Vec3{0.3, 1, 0.2}
		v := dosemap.Vec3{-0.5, 0.1, 1}
		n := u.Cross(v).Unit()
		p, err := ObliquePlane(g, c.Add(n.Scale(d)), u, v, 0.6)
		if err != nil {
			t.Fatal(err)
		}
		lines := p.Isolines(Sample(vol, p), R*R)
		if len(lines) != 1 || !lines[0].Closed {
			t.Fatalf("d=%g: %d lines, want one closed circle", d, len(lines))
		}
		worst := 0.0
		for m, q := range lines[0].Patient {
			worst = math.Max(worst, math.Abs(q.Sub(c).Norm()-R))
			if math.Abs(p.Distance(q)-p.Distance(c.Add(n.Scale(d)))) > 1e-9 {
				t.Fatalf("d=%g: vertex %d off the plane", d, m)
			}
			x, y := p.Pixel(q)
			if px := lines[0].Pixels[m]; math.Abs(px.X-x) > 1e-9 || math.Abs(px.Y-y) > 1e-9 {
				t.Fatalf("d=%g: pixel and patient coordinates of vertex %d disagree", d, m)
			}
		}
		if worst > 0.1 {
			t.Errorf("d=%g: vertex off the sphere by %.3f mm (tolerance 0.1)", d, worst)
		}
	}
}
