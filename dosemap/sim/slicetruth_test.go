package sim

import (
	"math"
	"testing"

	"dosecover/dosemap"
)

// TestSliceAverager checks the average across a 3 mm slice that the
// slice-averaged truth uses (three points 1 mm apart, linear interpolation
// between 1.2 mm voxels):
//   - a temperature linear in z is unchanged away from the grid's top and
//     bottom (computed from the definition: the mean of a linear function
//     at points symmetric about z is its value at z; to 1e-9 °C);
//   - a Gaussian profile along z (σ 3 mm, 20 °C rise) gives the mean of
//     its values at z and z ± 1 mm, within the error bound of linear
//     interpolation between voxels h = 1.2 mm apart at the two outer
//     points: 2/3 · h²/8 · max|f”| = 2/3 · 0.18 · 20/9 = 0.27 °C
//     (computed from the interpolation error bound; the thermometry
//     voxels of the simulator interpolate the same way).
func TestSliceAverager(t *testing.T) {
	g := dosemap.NewAxialGeometry(3, 3, 40, dosemap.Vec3{1.2, 1.2, 1.2}, dosemap.Vec3{})
	a := newSliceAverager(g, 3)
	lin := make([]float64, g.Len())
	gauss := make([]float64, g.Len())
	const sigma, rise, zc = 3.0, 20.0, 24.0
	prof := func(z float64) float64 { return 37 + rise*math.Exp(-(z-zc)*(z-zc)/(2*sigma*sigma)) }
	for n := range lin {
		_, _, k := g.IJK(n)
		z := float64(k) * 1.2
		lin[n] = 37 + 0.5*z
		gauss[n] = prof(z)
	}
	out := append([]float64(nil), a.average(lin)...)
	for n, v := range out {
		if _, _, k := g.IJK(n); k >= 1 && k < g.Slices-1 {
			if math.Abs(v-lin[n]) > 1e-9 {
				t.Fatalf("linear profile at slice %d: %.6f, want %.6f", k, v, lin[n])
			}
		}
	}
	out = a.average(gauss)
	for n, v := range out {
		_, _, k := g.IJK(n)
		if k < 2 || k > g.Slices-3 {
			continue
		}
		z := float64(k) * 1.2
		want := (prof(z) + prof(z-1) + prof(z+1)) / 3
		if math.Abs(v-want) > 2.0/3*1.2*1.2/8*rise/(sigma*sigma) {
			t.Fatalf("Gaussian profile at z = %.1f mm: %.3f °C, want %.3f", z, v, want)
		}
	}
}
