package view

import (
	"math"
	"math/rand/v2"

	"dosecover/dosemap"
)

// phantom is an invented test scene: a gel body phantom with inclusions, a
// spherical target of radius 12 mm at the origin, a 5 mm margin, a
// cylindrical avoid structure and the cumulative dose of six sonications
// on a coarser thermometry grid: one at the centre, four on a ring around
// it (two ring positions left out, which leaves a hole in the target) and
// one off target that spills lethal dose outside the margin. A small blob of the dose grid is NaN (no
// valid thermometry).
type phantom struct {
	anatomy, dose      *dosemap.Volume
	target, avoid      dosemap.Structure
	margin             *dosemap.Volume
	holes, spill, notm *dosemap.Volume
	window             Window
}

const (
	phTargetR = 12.0
	phMarginR = 17.0
	phLethal  = 240.0
)

func newPhantom() *phantom {
	ph := &phantom{window: Window{Center: 560, Width: 1100}}
	ga := dosemap.NewAxialGeometry(161, 161, 41, dosemap.Vec3{1.25, 1.25, 2}, dosemap.Vec3{-100, -100, -40})
	rng := rand.New(rand.NewPCG(2026, 12))
	an := dosemap.NewVolume(ga)
	for n := range an.Data {
		i, j, k := ga.IJK(n)
		p := ga.Point(float64(i), float64(j), float64(k))
		x, y, z := p[0], p[1], p[2]
		// Elliptical body 170 × 140 mm with a brighter 7 mm rim; edges
		// are blurred over about a millimetre, as partial volume does.
		e := math.Hypot(x/85, y/70)
		dBody := (e - 1) * 77 // approximate signed distance, mm
		val := 520 + 430*soft(-(dBody+7))
		// Inclusions: a dark cyst, a bright nodule, a low-signal channel
		// along z.
		val += (180 - val) * soft(math.Hypot(x-38, y+20)-11)
		val += (1150 - val) * soft(math.Hypot(x+40, y-28)-8) * soft(math.Abs(z)-25)
		val += (300 - val) * soft(math.Hypot(x+22, y+18)-5)
		// A softly brighter region around the target.
		val += 160 * math.Exp(-(x*x+y*y+z*z)/(2*22*22))
		val += rng.NormFloat64() * 18
		val *= soft(dBody)
		an.Data[n] = float32(val)
	}
	ph.anatomy = an

	// Thermometry / dose grid: 2 × 2 × 3 mm, 48 × 48 × 13 voxels centred on
	// the target, shifted half a voxel against the anatomy grid.
	gd := dosemap.NewAxialGeometry(48, 48, 13, dosemap.Vec3{2, 2, 3}, dosemap.Vec3{-47, -47, -18})
	ds := dosemap.NewVolume(gd)
	type son struct{ x, y, z, peak, sxy, sz float64 }
	var sons []son
	sons = append(sons, son{0, 0, 0, 3000, 4, 5.5})
	for a := 0; a < 6; a++ {
		if a == 3 || a == 4 { // left out: a hole in the target
			continue
		}
		ang := float64(a) * math.Pi / 3
		sons = append(sons, son{6.5 * math.Cos(ang), 6.5 * math.Sin(ang), 0, 5000, 4, 5.5})
	}
	sons = append(sons, son{21, 11, 0, 2500, 3.2, 5}) // off target
	for n := range ds.Data {
		i, j, k := gd.IJK(n)
		p := gd.Point(float64(i), float64(j), float64(k))
		var d float64
		for _, s := range sons {
			dx, dy, dz := p[0]-s.x, p[1]-s.y, p[2]-s.z
			d += s.peak * math.Exp(-(dx*dx+dy*dy)/(2*s.sxy*s.sxy)-dz*dz/(2*s.sz*s.sz))
		}
		if math.Hypot(p[0]+9, p[1]-8) < 4 && math.Abs(p[2]) < 5 {
			d = math.NaN() // signal dropout
		}
		ds.Data[n] = float32(d)
	}
	ph.dose = ds

	// Target: circles on every anatomy slice through the sphere.
	ph.target = dosemap.Structure{Number: 1, Name: "Target", Role: dosemap.RoleTarget}
	for z := -12.0; z <= 12; z += 2 {
		r := math.Sqrt(phTargetR*phTargetR - z*z)
		if r < 1 {
			continue
		}
		ph.target.Contours = append(ph.target.Contours, circle(0, 0, z, r, 64))
	}
	// Avoid structure: a cylinder of radius 6 mm around the low-signal
	// channel, drawn on every anatomy slice.
	ph.avoid = dosemap.Structure{Number: 2, Name: "Channel", Role: dosemap.RoleAvoid}
	for z := -40.0; z <= 40; z += 2 {
		ph.avoid.Contours = append(ph.avoid.Contours, circle(-22, -18, z, 6, 48))
	}
	// Masks on the dose grid.
	ph.margin = dosemap.NewVolume(gd)
	ph.holes = dosemap.NewVolume(gd)
	ph.spill = dosemap.NewVolume(gd)
	ph.notm = dosemap.NewVolume(gd)
	for n, d := range ds.Data {
		i, j, k := gd.IJK(n)
		r := gd.Point(float64(i), float64(j), float64(k)).Norm()
		inT, inM := r <= phTargetR, r <= phMarginR
		if inM {
			ph.margin.Data[n] = 1
		}
		switch {
		case d != d:
			if inM {
				ph.notm.Data[n] = 1
			}
		case inT && float64(d) < phLethal:
			ph.holes.Data[n] = 1
		case !inM && float64(d) >= phLethal:
			ph.spill.Data[n] = 1
		}
	}
	return ph
}

// soft is 1 well inside (d < 0), 0 well outside, with a 1.5 mm ramp.
func soft(d float64) float64 { return math.Max(0, math.Min(1, 0.5-d/1.5)) }

func circle(cx, cy, z, r float64, n int) dosemap.Contour {
	c := dosemap.Contour{}
	for m := 0; m < n; m++ {
		a := 2 * math.Pi * float64(m) / float64(n)
		c.Points = append(c.Points, dosemap.Vec3{cx + r*math.Cos(a), cy + r*math.Sin(a), z})
	}
	return c
}

// scene returns the phantom's full scene on plane p.
func (ph *phantom) scene(p Plane) *Scene {
	centre := dosemap.Vec3{0, 0, 0}
	return &Scene{
		Plane:   p,
		Anatomy: ph.anatomy, Window: ph.window,
		Dose: ph.dose, Scale: DefaultDoseScale(), Lethal: phLethal,
		Target:       Region{Structure: &ph.target},
		Margin:       Region{Mask: ph.margin},
		Avoid:        []Region{{Structure: &ph.avoid}},
		Holes:        Region{Mask: ph.holes},
		Spill:        Region{Mask: ph.spill},
		NotMonitored: Region{Mask: ph.notm},
		Marker:       &centre,
		Annotations:  true,
	}
}
