package sim

import (
	"fmt"
	"math"
	"testing"

	"dosecover/dosemap"
)

// Free diffusion of a Gaussian: with no perfusion and no source the Pennes
// equation is the heat equation, whose Gaussian solution keeps its shape
// while the variance along each axis grows as σ² = σ0² + 2αt and the peak
// falls as Π σ0/σ (Carslaw & Jaeger, Conduction of Heat in Solids, 1959,
// §10.2). The second moment of the 7-point scheme grows by exactly 2αt on an
// unbounded lattice, so the variance tolerance (0.5 %) only covers the
// truncation at the grid boundary; the peak tolerance (1.5 %) covers the
// O(h²/σ²) discretisation error.
func TestBioheatGaussianDiffusion(t *testing.T) {
	cases := []struct {
		name    string
		spacing dosemap.Vec3
		n       [3]int
		sigma0  float64 // mm
		dur     float64 // s
	}{
		{"isotropic 1 mm", dosemap.Vec3{1, 1, 1}, [3]int{41, 41, 41}, 2.5, 20},
		{"anisotropic 1×1.25×2 mm", dosemap.Vec3{1, 1.25, 2}, [3]int{41, 37, 25}, 3, 30},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			g := dosemap.NewAxialGeometry(tc.n[0], tc.n[1], tc.n[2], tc.spacing, dosemap.Vec3{})
			c := dosemap.Vec3{float64(tc.n[0]-1) / 2 * tc.spacing[0], float64(tc.n[1]-1) / 2 * tc.spacing[1], float64(tc.n[2]-1) / 2 * tc.spacing[2]}
			b, err := NewBioheat(g, GelPhantom, 37)
			if err != nil {
				t.Fatal(err)
			}
			const amp = 10.0
			for n := range b.T {
				i, j, k := g.IJK(n)
				r := g.Point(float64(i), float64(j), float64(k)).Sub(c)
				b.T[n] = 37 + amp*math.Exp(-r.Dot(r)/(2*tc.sigma0*tc.sigma0))
			}
			var0 := moments(b, c)
			b.Advance(tc.dur, 0, nil)
			got := moments(b, c)
			alpha := GelPhantom.Diffusivity() * 1e6 // mm²/s
			wantVar := 2 * alpha * tc.dur
			for ax := 0; ax < 3; ax++ {
				grow := got[ax] - var0[ax]
				if math.Abs(grow-wantVar)/wantVar > 0.005 {
					t.Errorf("axis %d: variance grew by %.4f mm², want 2αt = %.4f mm²", ax, grow, wantVar)
				}
			}
			s2 := tc.sigma0*tc.sigma0 + wantVar
			wantPeak := amp * math.Pow(tc.sigma0*tc.sigma0/s2, 1.5)
			ci, cj, ck := tc.n[0]/2, tc.n[1]/2, tc.n[2]/2
			peak := b.T[g.Index(ci, cj, ck)] - 37
			if math.Abs(peak-wantPeak)/wantPeak > 0.015 {
				t.Errorf("peak rise %.4f °C, want %.4f °C", peak, wantPeak)
			}
		})
	}
}

// moments returns the variance (mm²) of the temperature rise along x, y, z
// about c.
func moments(b *Bioheat, c dosemap.Vec3) [3]float64 {
	var sum float64
	var m [3]float64
	g := b.Geometry
	for n, v := range b.T {
		d := v - b.Arterial
		i, j, k := g.IJK(n)
		r := g.Point(float64(i), float64(j), float64(k)).Sub(c)
		sum += d
		for ax := 0; ax < 3; ax++ {
			m[ax] += d * r[ax] * r[ax]
		}
	}
	for ax := range m {
		m[ax] /= sum
	}
	return m
}

// Steady state of a small Gaussian source with perfusion against the closed
// form. For a point source of power P the steady Pennes equation gives
// (Pennes 1948; e.g. Vyas & Rustgi, Int J Hyperthermia 1992;8:459)
//
//	ΔT(r) = P/(4πk r) · exp(−r/L),  L = sqrt(k/(w_b c_b)).
//
// Convolving with the Gaussian source of width σ multiplies this by
// exp(σ²/(2L²)) for r ≫ σ (the erfc terms of the exact convolution are 2
// and 0 to within 1e-6 at r ≥ 5σ). Tolerance 3 %: the 7-point lattice
// Green's function differs from 1/(4πr) by up to ~1.5 % at r = 4h (lattice
// Green's function asymptotics, Maradudin et al. 1960, from memory), and
// the Dirichlet boundary 6L away perturbs by exp(-6) ≈ 0.25 %.
func TestBioheatSteadyStatePointSource(t *testing.T) {
	tissue := Tissue{Name: "strongly perfused test tissue", Conductivity: 0.5, Density: 1050, SpecificHeat: 3600,
		Perfusion: 5, BloodHeat: 3617}
	L := tissue.PerfusionLength() * 1e3 // mm, ≈ 5.26
	const n = 67
	g := dosemap.NewAxialGeometry(n, n, n, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{-33, -33, -33})
	b, err := NewBioheat(g, tissue, 37)
	if err != nil {
		t.Fatal(err)
	}
	const P = 0.05 // W
	const sigma = 0.8
	q := make([]float64, g.Len())
	FocalSpot{Center: dosemap.Vec3{}, Direction: dosemap.Vec3{0, 0, 1}, Power: P, SigmaAxial: sigma, SigmaLateral: sigma}.Deposit(g, q)
	// The discrete source integrates to P within the sampling error; check.
	var tot float64
	for _, v := range q {
		tot += v * 1e-9
	}
	if math.Abs(tot-P)/P > 1e-3 {
		t.Fatalf("deposited power %g W, want %g W", tot, P)
	}
	// Relaxation time rho*c/(w_b*c_b) ≈ 209 s; 10 of them leave e^-10.
	tau := tissue.Density * tissue.SpecificHeat / (tissue.Perfusion * tissue.BloodHeat)
	b.Advance(10*tau, 0, q)
	for _, r := range []int{4, 6, 8, 10, 12, 14} {
		want := P / (4 * math.Pi * tissue.Conductivity * float64(r) * 1e-3) * math.Exp(-float64(r)/L) * math.Exp(sigma*sigma/(2*L*L))
		for _, d := range [][3]int{{r, 0, 0}, {0, -r, 0}, {0, 0, r}} {
			got := b.T[g.Index(33+d[0], 33+d[1], 33+d[2])] - 37
			if math.Abs(got-want)/want > 0.03 {
				t.Errorf("r = %d mm along %v: rise %.5f °C, want %.5f °C (%.1f %%)", r, d, got, want, 100*(got-want)/want)
			}
		}
	}
}

func TestBioheatStableStep(t *testing.T) {
	// Isotropic, no perfusion: h²/(6α).
	g := dosemap.NewAxialGeometry(5, 5, 5, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	b, _ := NewBioheat(g, GelPhantom, 37)
	want := 1e-6 / (6 * GelPhantom.Diffusivity())
	if got := b.StableStep(); math.Abs(got-want)/want > 1e-12 {
		t.Errorf("StableStep = %g s, want h²/(6α) = %g s", got, want)
	}
	// Beyond the bound the explicit scheme blows up: check that a step
	// slightly above the limit is refused.
	defer func() {
		if recover() == nil {
			t.Error("Step above the stability limit did not panic")
		}
	}()
	b.Step(want*1.01, nil)
}

func TestTissueValidate(t *testing.T) {
	for _, tc := range []Tissue{GelPhantom, Water, Muscle, Fibroid} {
		if err := tc.Validate(); err != nil {
			t.Errorf("%s: %v", tc.Name, err)
		}
	}
	bad := GelPhantom
	bad.Conductivity = 0
	if bad.Validate() == nil {
		t.Error("zero conductivity accepted")
	}
}

func BenchmarkBioheatStep(b *testing.B) {
	for _, n := range []int{32, 64, 96} {
		b.Run(fmt.Sprintf("%d^3", n), func(b *testing.B) {
			g := dosemap.NewAxialGeometry(n, n, n, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
			s, _ := NewBioheat(g, GelPhantom, 37)
			dt := s.StableStep()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				s.Step(dt, nil)
			}
			b.ReportMetric(float64(g.Len())*float64(b.N)/b.Elapsed().Seconds()/1e6, "Mvoxel/s")
		})
	}
}
