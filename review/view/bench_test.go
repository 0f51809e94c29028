package view

import (
	"fmt"
	"image"
	"math"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/testkit"
)

// benchScene returns a scene whose acquisition plane has n×n pixels of
// 0.5·(512/n) mm, so that every size covers the same 256 mm field: anatomy
// on an n×n×5 grid, dose on a 96×96×9 thermometry grid of 2 mm with a
// lethal region of about 20 mm, a target structure, margin, hole, spill
// and not-monitored masks.
func benchScene(n int) *Scene {
	px := 256.0 / float64(n)
	ga := dosemap.NewAxialGeometry(n, n, 5, dosemap.Vec3{px, px, 3}, dosemap.Vec3{-128 + px/2, -128 + px/2, -6})
	an := dosemap.NewVolume(ga)
	for m := range an.Data {
		i, j, k := ga.IJK(m)
		q := ga.Point(float64(i), float64(j), float64(k))
		an.Data[m] = float32(500 + 300*math.Sin(q[0]/9)*math.Cos(q[1]/13))
	}
	gd := dosemap.NewAxialGeometry(96, 96, 9, dosemap.Vec3{2, 2, 3}, dosemap.Vec3{-95, -95, -12})
	ds := dosemap.NewVolume(gd)
	margin, holes, spill, notm := dosemap.NewVolume(gd), dosemap.NewVolume(gd), dosemap.NewVolume(gd), dosemap.NewVolume(gd)
	for m := range ds.Data {
		i, j, k := gd.IJK(m)
		q := gd.Point(float64(i), float64(j), float64(k))
		d := 4000*math.Exp(-(q[0]*q[0]+q[1]*q[1])/(2*36)-q[2]*q[2]/50) +
			1500*math.Exp(-((q[0]-22)*(q[0]-22)+(q[1]-9)*(q[1]-9))/(2*9)-q[2]*q[2]/30)
		ds.Data[m] = float32(d)
		r := q.Norm()
		if r < 17 {
			margin.Data[m] = 1
		}
		if r < 12 && d < 240 {
			holes.Data[m] = 1
		}
		if r >= 17 && d >= 240 {
			spill.Data[m] = 1
		}
		if math.Hypot(q[0]+8, q[1]-8) < 3 {
			ds.Data[m] = float32(math.NaN())
			if r < 17 {
				notm.Data[m] = 1
			}
		}
	}
	target := &dosemap.Structure{Name: "Target", Role: dosemap.RoleTarget}
	for z := -12.0; z <= 12; z += 3 {
		target.Contours = append(target.Contours, circle(0, 0, z, math.Sqrt(150-z*z), 64))
	}
	p := AcquisitionPlane(ga, 2)
	centre := dosemap.Vec3{}
	return &Scene{
		Plane: p, Anatomy: an, Window: Window{500, 700},
		Dose: ds, Scale: DefaultDoseScale(), Lethal: 240,
		Target: Region{Structure: target}, Margin: Region{Mask: margin},
		Holes: Region{Mask: holes}, Spill: Region{Mask: spill}, NotMonitored: Region{Mask: notm},
		Marker: &centre, Annotations: true,
	}
}

var benchSizes = []int{256, 512, 1024}

// reportCPU adds the process CPU time per operation since c0 as the metric
// cpu-ms/op: on a machine shared with other work it tracks the cost of the
// code better than wall time does.
func reportCPU(b *testing.B, c0 time.Duration) {
	if c := testkit.CPUTime(); c > 0 && b.N > 0 {
		b.ReportMetric(float64(c-c0)/float64(b.N)/1e6, "cpu-ms/op")
	}
}

// BenchmarkRenderNewPlane composites an n×n view of a plane shown for the
// first time: sampling anatomy and dose on the plane, tracing the lethal
// isoline and every outline, and the per-pixel compositing (what scrolling
// to another slice costs).
func BenchmarkRenderNewPlane(b *testing.B) {
	for _, n := range benchSizes {
		s := benchScene(n)
		v := FitView(s.Plane, n, n)
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			r := NewRenderer()
			var dst *image.RGBA
			c0 := testkit.CPUTime()
			for b.Loop() {
				r.Invalidate()
				dst, _ = r.Render(s, v, dst)
			}
			reportCPU(b, c0)
		})
	}
}

// BenchmarkRenderPan composites an n×n view of a plane already shown,
// panned and zoomed each time (what dragging and zooming cost).
func BenchmarkRenderPan(b *testing.B) {
	for _, n := range benchSizes {
		s := benchScene(n)
		v := FitView(s.Plane, n, n)
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			r := NewRenderer()
			dst, _ := r.Render(s, v, nil)
			k := 0
			c0 := testkit.CPUTime()
			for b.Loop() {
				k++
				w := v.ZoomAt(s.Plane, float64(n)/2, float64(n)/2, 1+0.1*float64(k%5)).Pan(s.Plane, float64(k%7), 0)
				dst, _ = r.Render(s, w, dst)
			}
			reportCPU(b, c0)
		})
	}
}

// BenchmarkSample samples a volume on an n×n plane: the anatomy on its
// acquisition plane (row copies) and the dose grid on a plane tilted by
// about 3° inside it (the general trilinear path at every pixel).
func BenchmarkSample(b *testing.B) {
	for _, n := range benchSizes {
		s := benchScene(n)
		dst := make([]float32, s.Plane.Len())
		g := s.Dose.Geometry
		obl, _ := ObliquePlane(g, dosemap.Vec3{}, dosemap.Vec3{1, 0, 0.05}, dosemap.Vec3{0, 1, 0.05}, 190.0/float64(n))
		obl.Width, obl.Height = n, n
		odst := make([]float32, obl.Len())
		b.Run(fmt.Sprintf("acquisition/%d", n), func(b *testing.B) {
			c0 := testkit.CPUTime()
			for b.Loop() {
				SampleInto(dst, s.Anatomy, s.Plane)
			}
			reportCPU(b, c0)
		})
		b.Run(fmt.Sprintf("oblique/%d", n), func(b *testing.B) {
			c0 := testkit.CPUTime()
			for b.Loop() {
				SampleInto(odst, s.Dose, obl)
			}
			reportCPU(b, c0)
		})
	}
}

// BenchmarkMarchingSquares traces the lethal isoline of the dose sampled
// on an n×n plane.
func BenchmarkMarchingSquares(b *testing.B) {
	for _, n := range benchSizes {
		s := benchScene(n)
		vals := Sample(s.Dose, s.Plane)
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			c0 := testkit.CPUTime()
			for b.Loop() {
				MarchingSquares(vals, n, n, 240)
			}
			reportCPU(b, c0)
		})
	}
}
