package sim

import (
	"fmt"
	"math"
	"runtime"
	"sync"

	"dosecover/dosemap"
)

// Tissue holds the thermal properties of a homogeneous medium for the Pennes
// bioheat equation (SI units).
type Tissue struct {
	Name         string  `json:"name"`
	Conductivity float64 `json:"conductivity_w_per_m_k"`         // k, W m^-1 K^-1
	Density      float64 `json:"density_kg_per_m3"`              // rho, kg m^-3
	SpecificHeat float64 `json:"specific_heat_j_per_kg_k"`       // c, J kg^-1 K^-1
	Perfusion    float64 `json:"perfusion_kg_per_m3_s"`          // w_b, blood mass perfused per tissue volume, kg m^-3 s^-1
	BloodHeat    float64 `json:"blood_specific_heat_j_per_kg_k"` // c_b, specific heat of blood, J kg^-1 K^-1
	Source       string  `json:"source"`                         // where the values come from
}

// Diffusivity returns the thermal diffusivity alpha = k/(rho*c) in m² s^-1.
func (t Tissue) Diffusivity() float64 { return t.Conductivity / (t.Density * t.SpecificHeat) }

// PerfusionLength returns L = sqrt(k/(w_b*c_b)) in metres, the distance over
// which perfusion damps a steady temperature rise (Pennes 1948); +Inf
// without perfusion.
func (t Tissue) PerfusionLength() float64 {
	if t.Perfusion <= 0 {
		return math.Inf(1)
	}
	return math.Sqrt(t.Conductivity / (t.Perfusion * t.BloodHeat))
}

// Validate reports a non-positive or non-finite property.
func (t Tissue) Validate() error {
	for _, p := range []struct {
		name string
		v    float64
		zero bool
	}{{"conductivity", t.Conductivity, false}, {"density", t.Density, false},
		{"specific heat", t.SpecificHeat, false}, {"perfusion", t.Perfusion, true}, {"blood specific heat", t.BloodHeat, true}} {
		if math.IsNaN(p.v) || math.IsInf(p.v, 0) || p.v < 0 || (p.v == 0 && !p.zero) {
			return fmt.Errorf("tissue %q: %s %g is not valid", t.Name, p.name, p.v)
		}
	}
	return nil
}

// Literature values of thermal properties. The values are typical figures
// quoted across the hyperthermia literature; individual sources are named
// beside each one and marked "from memory" where the figure is recalled
// rather than copied from the text.
var (
	// GelPhantom is a water-based tissue-mimicking gel (agar or
	// polyacrylamide). k 0.58 W/m/K, rho 1040 kg/m³, c 3800 J/kg/K are in the
	// range reported for tissue-mimicking materials (IEC 60601-2-37 reference
	// material; Zell et al., Phys Med Biol 2007;52:N475 — from memory). A gel
	// has no perfusion.
	GelPhantom = Tissue{Name: "tissue-mimicking gel", Conductivity: 0.58, Density: 1040, SpecificHeat: 3800,
		Source: "IEC 60601-2-37 tissue-mimicking material; Zell et al. 2007 (from memory)"}

	// Water at 37 °C: k 0.63 W/m/K, rho 993 kg/m³, c 4178 J/kg/K (CRC
	// Handbook of Chemistry and Physics, from memory).
	Water = Tissue{Name: "water at 37 °C", Conductivity: 0.63, Density: 993, SpecificHeat: 4178,
		Source: "CRC Handbook of Chemistry and Physics (from memory)"}

	// Muscle: k 0.49 W/m/K, rho 1090 kg/m³, c 3421 J/kg/K (IT'IS Foundation
	// tissue properties database v4, from memory); perfusion 0.6 kg/m³/s
	// (about 3.3 ml/100 g/min; Pennes 1948 used w_b of the order of
	// 0.3-0.6 kg/m³/s for forearm tissue, from memory); blood c_b 3617 J/kg/K
	// (IT'IS, from memory).
	Muscle = Tissue{Name: "skeletal muscle", Conductivity: 0.49, Density: 1090, SpecificHeat: 3421,
		Perfusion: 0.6, BloodHeat: 3617,
		Source: "IT'IS tissue database v4; Pennes 1948 (from memory)"}

	// Fibroid (uterine leiomyoma), poorly perfused: k 0.53, rho 1050,
	// c 3600, w_b 0.3 kg/m³/s, c_b 3617 (typical values used in focused
	// ultrasound modelling, from memory).
	Fibroid = Tissue{Name: "uterine fibroid", Conductivity: 0.53, Density: 1050, SpecificHeat: 3600,
		Perfusion: 0.3, BloodHeat: 3617,
		Source: "typical modelling values (from memory)"}
)

// FocalSpot is the heat deposited by one sonication: an ellipsoidal Gaussian
// elongated along the beam axis,
//
//	Q(r) = P / ((2π)^{3/2} σ_a σ_l²) · exp(-a²/(2σ_a²) - ρ²/(2σ_l²))
//
// where a is the distance from Center along Direction, ρ the distance from
// the beam axis, and P the absorbed power (W). The integral of Q over space
// is P. A focused transducer's focal zone is several times longer along the
// beam than across it (common practice).
type FocalSpot struct {
	Center       dosemap.Vec3 // focus, patient mm
	Direction    dosemap.Vec3 // beam propagation direction (normalised on use)
	Power        float64      // absorbed power P, W
	SigmaAxial   float64      // σ_a along the beam, mm
	SigmaLateral float64      // σ_l across the beam, mm
}

// Deposit adds the spot's power density (W/m³) at every voxel centre of g
// into q. Voxels farther than 4σ are skipped (the Gaussian tail there is
// below 3.4e-4 of the peak).
func (s FocalSpot) Deposit(g dosemap.Geometry, q []float64) {
	if s.Power == 0 {
		return
	}
	d := s.Direction.Unit()
	sa, sl := s.SigmaAxial*1e-3, s.SigmaLateral*1e-3
	peak := s.Power / (math.Pow(2*math.Pi, 1.5) * sa * sl * sl)
	reach := 4 * math.Max(s.SigmaAxial, s.SigmaLateral)
	ci, cj, ck := g.Voxel(s.Center)
	ri, rj, rk := reach/g.Spacing[0], reach/g.Spacing[1], reach/g.Spacing[2]
	i0, i1 := clampInt(int(math.Floor(ci-ri)), 0, g.Cols-1), clampInt(int(math.Ceil(ci+ri)), 0, g.Cols-1)
	j0, j1 := clampInt(int(math.Floor(cj-rj)), 0, g.Rows-1), clampInt(int(math.Ceil(cj+rj)), 0, g.Rows-1)
	k0, k1 := clampInt(int(math.Floor(ck-rk)), 0, g.Slices-1), clampInt(int(math.Ceil(ck+rk)), 0, g.Slices-1)
	ia, il := 1/(2*s.SigmaAxial*s.SigmaAxial), 1/(2*s.SigmaLateral*s.SigmaLateral)
	for k := k0; k <= k1; k++ {
		for j := j0; j <= j1; j++ {
			for i := i0; i <= i1; i++ {
				r := g.Point(float64(i), float64(j), float64(k)).Sub(s.Center)
				a := r.Dot(d)
				rho2 := r.Dot(r) - a*a
				e := a*a*ia + rho2*il
				if e > 8 {
					continue
				}
				q[g.Index(i, j, k)] += peak * math.Exp(-e)
			}
		}
	}
}

func clampInt(v, lo, hi int) int {
	if v < lo {
		return lo
	}
	if v > hi {
		return hi
	}
	return v
}

// Bioheat integrates the Pennes bioheat equation (Pennes, J Appl Physiol
// 1948;1:93-122)
//
//	rho c ∂T/∂t = k ∇²T − w_b c_b (T − T_a) + Q
//
// on a regular grid with the explicit forward-Euler scheme and the 7-point
// Laplacian. Voxels on the outer faces of the grid are held at T_a
// (Dirichlet boundary), so the grid must extend well beyond the heated
// region. The scheme is stable for (von Neumann analysis)
//
//	dt ≤ 1 / (2α(1/hx² + 1/hy² + 1/hz²) + w_b c_b/(rho c)),  α = k/(rho c)
//
// which is dt ≤ h²/(6α) on an isotropic grid without perfusion.
type Bioheat struct {
	Geometry dosemap.Geometry // grid (mm); only its spacing and size enter the stencil
	Tissue   Tissue
	Arterial float64   // T_a, °C; also the boundary and initial temperature
	T        []float64 // temperature, °C, indexed like Geometry.Index
	Time     float64   // simulated time, s
	next     []float64
}

// NewBioheat returns a simulator on g filled with temperature arterial.
func NewBioheat(g dosemap.Geometry, t Tissue, arterial float64) (*Bioheat, error) {
	if err := g.Validate(); err != nil {
		return nil, fmt.Errorf("bioheat grid: %w", err)
	}
	if err := t.Validate(); err != nil {
		return nil, err
	}
	if g.Cols < 3 || g.Rows < 3 || g.Slices < 3 {
		return nil, fmt.Errorf("bioheat grid %d×%d×%d: need at least 3 voxels along each axis", g.Cols, g.Rows, g.Slices)
	}
	b := &Bioheat{Geometry: g, Tissue: t, Arterial: arterial, T: make([]float64, g.Len()), next: make([]float64, g.Len())}
	for n := range b.T {
		b.T[n] = arterial
	}
	return b, nil
}

// StableStep returns the largest stable explicit time step in seconds (see
// Bioheat).
func (b *Bioheat) StableStep() float64 {
	a := b.Tissue.Diffusivity()
	s := 0.0
	for _, h := range b.Geometry.Spacing {
		hm := h * 1e-3
		s += 1 / (hm * hm)
	}
	return 1 / (2*a*s + b.Tissue.Perfusion*b.Tissue.BloodHeat/(b.Tissue.Density*b.Tissue.SpecificHeat))
}

// Step advances the temperature by dt seconds with power density q (W/m³
// per voxel; nil for none). It panics if dt exceeds StableStep, which is a
// programming error.
func (b *Bioheat) Step(dt float64, q []float64) {
	if dt > b.StableStep()*(1+1e-12) {
		panic(fmt.Sprintf("sim: time step %g s exceeds the stability limit %g s", dt, b.StableStep()))
	}
	g := b.Geometry
	t := b.Tissue
	rc := t.Density * t.SpecificHeat
	a := t.Diffusivity() * dt
	hx, hy, hz := g.Spacing[0]*1e-3, g.Spacing[1]*1e-3, g.Spacing[2]*1e-3
	cx, cy, cz := a/(hx*hx), a/(hy*hy), a/(hz*hz)
	cp := t.Perfusion * t.BloodHeat * dt / rc
	cq := dt / rc
	center := 1 - 2*(cx+cy+cz) - cp
	nx, ny, nz := g.Cols, g.Rows, g.Slices
	sx, sy := 1, nx
	sz := nx * ny
	T, N, Ta := b.T, b.next, b.Arterial
	work := func(k0, k1 int) {
		for k := k0; k < k1; k++ {
			for j := 0; j < ny; j++ {
				row := (k*ny + j) * nx
				if k == 0 || k == nz-1 || j == 0 || j == ny-1 {
					for i := 0; i < nx; i++ {
						N[row+i] = Ta
					}
					continue
				}
				N[row] = Ta
				N[row+nx-1] = Ta
				for i := 1; i < nx-1; i++ {
					n := row + i
					v := center*T[n] +
						cx*(T[n-sx]+T[n+sx]) + cy*(T[n-sy]+T[n+sy]) + cz*(T[n-sz]+T[n+sz]) +
						cp*Ta
					if q != nil {
						v += cq * q[n]
					}
					N[n] = v
				}
			}
		}
	}
	workers := runtime.GOMAXPROCS(0)
	if workers > nz {
		workers = nz
	}
	if workers <= 1 || g.Len() < 1<<15 {
		work(0, nz)
	} else {
		var wg sync.WaitGroup
		per := (nz + workers - 1) / workers
		for k0 := 0; k0 < nz; k0 += per {
			k1 := min(k0+per, nz)
			wg.Add(1)
			go func() { defer wg.Done(); work(k0, k1) }()
		}
		wg.Wait()
	}
	b.T, b.next = N, T
	b.Time += dt
}

// Advance integrates for duration seconds with power density q (nil for
// none), in equal steps no longer than maxStep (and never above
// StableStep). Each voxel's update depends only on the previous state, so
// the result does not depend on the number of goroutines.
func (b *Bioheat) Advance(duration, maxStep float64, q []float64) {
	if duration <= 0 {
		return
	}
	limit := b.StableStep()
	if maxStep <= 0 || maxStep > limit {
		maxStep = limit
	}
	n := int(math.Ceil(duration/maxStep - 1e-9))
	dt := duration / float64(n)
	for s := 0; s < n; s++ {
		b.Step(dt, q)
	}
}
