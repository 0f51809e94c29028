package sim

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/safefile"
)

// DemoSeed is the seed of the built-in demo case.
const DemoSeed = 20261201

// Default acquisition and heating parameters shared by the built-in
// scenarios.
const (
	demoSigmaAxial   = 8.0 // mm, focal spot σ along the beam
	demoSigmaLateral = 2.4 // mm, across the beam
	demoPower        = 7.2 // W absorbed
	demoDuration     = 18  // s of heating
	demoCooling      = 120 // s of unimaged cooling between sonications
)

// baseProtocol returns the thermometry protocol of the scenarios: 3 T,
// TE 12.8 ms, α −0.01 ppm/°C (Ishihara et al. 1995, value from memory;
// testdata/check-values.md), a frame every 3 s (common practice), 1.25 mm in plane.
func baseProtocol(centre dosemap.Vec3) Protocol {
	return Protocol{Cols: 64, Rows: 64, Slices: 4, PixelSpacing: 1.25, SliceThickness: 3.5, Center: centre,
		FrameInterval: 3, Frames: 11, BaselineFrames: 2, B0: 3, TE: 0.0128, TR: 0.025, FlipAngle: 20,
		Alpha: -0.01, Sign: 1, SNR: 50, DriftRate: 0.003, DriftGradient: 0.002,
		BeamDirection: dosemap.Vec3{0, -1, 0}, SigmaAxial: demoSigmaAxial, SigmaLateral: demoSigmaLateral}
}

// spotGrid returns focal positions across the beam (the beam runs along y):
// nx columns dx apart in x centred on the lesion, on the planes z of zs,
// keeping those inside the lesion; ordered by z then x. Placing the spots
// on thermometry slice centres keeps the partial-volume loss small.
func spotGrid(l Ellipsoid, nx int, dx float64, zs []float64) []dosemap.Vec3 {
	var out []dosemap.Vec3
	for _, z := range zs {
		for kx := 0; kx < nx; kx++ {
			x := l.Center[0] + (float64(kx)-float64(nx-1)/2)*dx
			p := dosemap.Vec3{x, l.Center[1], z}
			if l.Contains(p) {
				out = append(out, p)
			}
		}
	}
	return out
}

// sliceCentres returns the z of the thermometry slice centres of s within
// reach mm of the lesion centre.
func sliceCentres(s *Session, reach float64) []float64 {
	g := s.ThermometryGeometry()
	var zs []float64
	for k := 0; k < g.Slices; k++ {
		z := g.Point(0, 0, float64(k))[2]
		if math.Abs(z-s.Phantom.Lesion.Center[2]) <= reach {
			zs = append(zs, z)
		}
	}
	return zs
}

// DemoSession returns the built-in demo scenario (invented): a 22 mm
// lesion in a tissue-mimicking gel phantom held at 37 °C, treated at 3 T
// with 15 sonications on a plan of 16 spots. Planned spots 4 and 8, at the
// lesion's left edge (+x) in its lower half, were never delivered, leaving a
// coverage hole; sonication 7, aimed at spot 9, landed 10.5 mm beyond the
// lesion's right edge (−x, beyond the 3 mm margin) and sonication 8
// repeated spot 9; frame 7 of sonication 6 was acquired with the phantom
// shifted by (3, 1.5, 0) mm (motion).
func DemoSession() *Session {
	centre := dosemap.Vec3{4.5, -12, 15}
	lesion := Ellipsoid{Center: centre, SemiAxes: dosemap.Vec3{11, 8, 7}}
	s := &Session{
		Label: "demo",
		Description: "Invented demonstration case: gel phantom with a 22 mm lesion at 3 T; 16 planned spots, " +
			"spots 4 and 8 never delivered (coverage hole at the +x edge, lower half), sonication 7 (aimed at spot 9) " +
			"landed beyond the margin (-x) and sonication 8 repeated spot 9, frame 7 of sonication 6 moved by (3, 1.5, 0) mm.",
		PatientName: "PHANTOM^GEL", PatientID: "DEMO-001", Seed: DemoSeed,
		Start: time.Date(2026, 1, 15, 10, 0, 0, 0, time.UTC),
		Phantom: Phantom{Center: dosemap.Vec3{0, 0, 15}, Radius: 60, Tissue: GelPhantom, BodyTemp: 37,
			Lesion: lesion, Avoid: Tube{Center: dosemap.Vec3{27, -6, 15}, Radius: 3.5}},
		Thermometry: baseProtocol(centre),
		Anatomy:     AnatomyProtocol{Cols: 160, Rows: 160, Slices: 16, PixelSpacing: 0.9, SliceThickness: 2.5, Center: dosemap.Vec3{0, 0, 15}},
		SimSpacing:  1.2, MarginMM: 3, Threshold: 240,
	}
	s.Planned = spotGrid(lesion, 4, 4.5, sliceCentres(s, lesion.SemiAxes[2]))
	const power, dur, cool = demoPower, demoDuration, demoCooling
	for n := range s.Planned {
		num := n + 1
		if num == 4 || num == 8 {
			continue // never delivered
		}
		if num == 9 {
			miss := s.Planned[n].Add(dosemap.Vec3{-10.5, 0, 0})
			s.Sonications = append(s.Sonications, SonicationSpec{Planned: num, Focus: miss, Power: power, Duration: dur, Cooling: cool, Spill: true})
		}
		s.Sonications = append(s.Sonications, SonicationSpec{Planned: num, Focus: s.Planned[n], Power: power, Duration: dur, Cooling: cool})
	}
	s.Motion = []Motion{{Sonication: 6, Frame: 7, Shift: dosemap.Vec3{3, 1.5, 0}}}
	return s
}

// WriteDemo writes the built-in demo case into dir (created if missing; it
// should be empty) and returns its truth.
func WriteDemo(dir string) (*Truth, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, &safefile.PathError{What: "creating", Path: dir, Err: err}
	}
	return WriteSession(dir, DemoSession())
}

// DemoDir returns the folder of the demo case in the user cache
// (os.UserCacheDir()/dosecover/demo-VERSION), generating it on first use.
// Generation writes into a temporary folder that is renamed into place, so
// a folder that exists is complete.
func DemoDir() (string, error) {
	cache, err := os.UserCacheDir()
	if err != nil {
		return "", fmt.Errorf("finding the user cache folder: %w", err)
	}
	return demoDirIn(filepath.Join(cache, "dosecover"), func(dir string) error {
		_, err := WriteDemo(dir)
		return err
	})
}

// Revision numbers the simulator's output: raise it whenever a change alters
// the files written for a given seed, so that a demo cached by an earlier
// build is not reused.
const Revision = 3

// demoFolderName is the demo's folder in the user cache.
var demoFolderName = fmt.Sprintf("demo-%s-r%d", dosemap.Version, Revision)

// demoDirIn generates the demo with write into parent/demo-VERSION unless a
// complete one is there.
func demoDirIn(parent string, write func(dir string) error) (string, error) {
	final := filepath.Join(parent, demoFolderName)
	if fi, err := os.Stat(filepath.Join(final, TruthFile)); err == nil && !fi.IsDir() {
		return final, nil
	}
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return "", fmt.Errorf("creating %s: %w", parent, err)
	}
	tmp, err := os.MkdirTemp(parent, ".demo-*.tmp")
	if err != nil {
		return "", fmt.Errorf("creating a folder in %s: %w", parent, err)
	}
	if err := write(tmp); err != nil {
		os.RemoveAll(tmp)
		return "", err
	}
	if err := os.Rename(tmp, final); err != nil {
		os.RemoveAll(tmp)
		// Another process may have finished first.
		if fi, e := os.Stat(filepath.Join(final, TruthFile)); e == nil && !fi.IsDir() {
			return final, nil
		}
		return "", fmt.Errorf("moving the demo case into %s: %w", final, err)
	}
	return final, nil
}

// VariedSession returns case number n (1-based) of a seeded family of
// invented cases: lesion size 16–28 mm and position, field strength 1.5 or
// 3 T, SNR, drift, 0–3 undelivered spots, possibly a spill and
// a motion frame.
func VariedSession(n int, seed uint64) *Session {
	rng := rand.New(rand.NewPCG(seed, uint64(n)))
	u := func(a, b float64) float64 { return a + (b-a)*rng.Float64() }
	centre := dosemap.Vec3{math.Round(u(-15, 15)*10) / 10, math.Round(u(-20, 5)*10) / 10, math.Round(u(0, 30)*10) / 10}
	diam := u(16, 28)
	lesion := Ellipsoid{Center: centre, SemiAxes: dosemap.Vec3{diam / 2, math.Min(diam/2*u(0.75, 0.85), 10), math.Min(diam/2*0.7, 6.8)}}
	p := baseProtocol(centre)
	if rng.IntN(3) == 0 {
		p.B0, p.TE = 1.5, 0.020
	}
	p.SNR = u(25, 60)
	// No standard attribute records the scanner's phase sign, so a family
	// of cases meant to be audited with one set of settings shares the
	// default sign; the draw is kept so the other parameters stay as they
	// were for a given seed.
	_ = rng.IntN(2)
	p.DriftRate = u(-0.006, 0.006)
	p.DriftGradient = u(-0.003, 0.003)
	side := 1.0
	if rng.IntN(2) == 0 {
		side = -1
	}
	s := &Session{
		Label:       fmt.Sprintf("case-%03d", n),
		PatientName: fmt.Sprintf("PHANTOM^CASE%03d", n), PatientID: fmt.Sprintf("SIM-%03d", n), Seed: seed*1000 + uint64(n),
		Start: time.Date(2026, 2, 1+n%27, 8+n%9, 0, 0, 0, time.UTC),
		Phantom: Phantom{Center: dosemap.Vec3{0, 0, centre[2]}, Radius: 60, Tissue: GelPhantom, BodyTemp: 37, Lesion: lesion,
			Avoid: Tube{Center: dosemap.Vec3{centre[0] + side*(diam/2+u(8, 14)), centre[1] + u(-6, 6), centre[2]}, Radius: u(2.5, 4)}},
		Thermometry: p,
		Anatomy:     AnatomyProtocol{Cols: 160, Rows: 160, Slices: 16, PixelSpacing: 0.9, SliceThickness: 2.5, Center: dosemap.Vec3{0, 0, centre[2]}},
		SimSpacing:  1.2, MarginMM: 3, Threshold: 240,
	}
	nx := max(1, int(math.Floor((2*lesion.SemiAxes[0]-5)/4.5))+1)
	s.Planned = spotGrid(lesion, nx, 4.5, sliceCentres(s, lesion.SemiAxes[2]-1.5))
	skip := map[int]bool{}
	for range rng.IntN(4) {
		skip[1+rng.IntN(len(s.Planned))] = true
	}
	spill := 0
	if rng.IntN(2) == 0 {
		spill = 1 + rng.IntN(len(s.Planned))
	}
	power := demoPower * u(0.93, 1.05)
	for k := range s.Planned {
		num := k + 1
		if skip[num] {
			continue
		}
		if num == spill {
			// Beyond the lesion sideways (x), staying inside the slab: 5–8 mm
			// past the lesion surface on the spot's own row, so the focus
			// always lands outside the target and beyond a 3 mm margin.
			sign := 1.0
			if s.Planned[k][0] < centre[0] {
				sign = -1
			}
			a := lesion.SemiAxes
			dy := (s.Planned[k][1] - lesion.Center[1]) / a[1]
			dz := (s.Planned[k][2] - lesion.Center[2]) / a[2]
			edge := a[0] * math.Sqrt(math.Max(0, 1-dy*dy-dz*dz))
			miss := s.Planned[k]
			miss[0] = lesion.Center[0] + sign*(edge+u(5, 8))
			s.Sonications = append(s.Sonications, SonicationSpec{Planned: num, Focus: miss, Power: power, Duration: demoDuration, Cooling: demoCooling, Spill: true})
		}
		s.Sonications = append(s.Sonications, SonicationSpec{Planned: num, Focus: s.Planned[k], Power: power, Duration: demoDuration, Cooling: demoCooling})
	}
	if rng.IntN(2) == 0 {
		s.Motion = []Motion{{Sonication: 1 + rng.IntN(len(s.Sonications)), Frame: 3 + rng.IntN(p.Frames-2), Shift: dosemap.Vec3{u(-4, 4), u(-4, 4), 0}}}
	}
	s.Description = fmt.Sprintf("Invented case %d of seed %d: %.1f mm lesion at %.1f T, %d planned spots, %d delivered sonications.",
		n, seed, diam, p.B0, len(s.Planned), len(s.Sonications))
	return s
}

// WriteCases writes n varied cases into dir/case-001 ... (see
// VariedSession) and returns their truths. Existing case folders are an
// error: nothing is overwritten.
func WriteCases(dir string, n int, seed uint64) ([]*Truth, error) {
	if n < 0 {
		return nil, fmt.Errorf("number of cases %d is negative", n)
	}
	var out []*Truth
	for k := 1; k <= n; k++ {
		s := VariedSession(k, seed)
		sub := filepath.Join(dir, s.Label)
		if _, err := os.Stat(sub); err == nil {
			return out, fmt.Errorf("writing %s: the folder already exists", sub)
		} else if !errors.Is(err, os.ErrNotExist) {
			return out, fmt.Errorf("writing %s: %w", sub, err)
		}
		if err := os.MkdirAll(sub, 0o755); err != nil {
			return out, &safefile.PathError{What: "creating", Path: sub, Err: err}
		}
		t, err := WriteSession(sub, s)
		if err != nil {
			return out, err
		}
		out = append(out, t)
	}
	return out, nil
}

// TypicalSession returns a large session for benchmarks: a 25 × 18 × 15 mm
// lesion,
// 24 sonications of 14 frames each, 6 thermometry slices of 128×128,
// magnitude and phase (4032 thermometry files).
func TypicalSession(seed uint64) *Session {
	centre := dosemap.Vec3{-3, -10, 20}
	lesion := Ellipsoid{Center: centre, SemiAxes: dosemap.Vec3{12.5, 9, 7.5}}
	p := baseProtocol(centre)
	p.Cols, p.Rows, p.Slices, p.SliceThickness, p.Frames = 128, 128, 6, 3, 14
	s := &Session{
		Label: "typical", Description: "Invented benchmark session: 25 mm lesion, 24 sonications × 14 frames, 6 slices of 128×128.",
		PatientName: "PHANTOM^TYPICAL", PatientID: "BENCH-001", Seed: seed,
		Start: time.Date(2026, 3, 2, 9, 0, 0, 0, time.UTC),
		Phantom: Phantom{Center: dosemap.Vec3{0, 0, 20}, Radius: 70, Tissue: GelPhantom, BodyTemp: 37, Lesion: lesion,
			Avoid: Tube{Center: dosemap.Vec3{-30, -8, 20}, Radius: 3}},
		Thermometry: p,
		Anatomy:     AnatomyProtocol{Cols: 192, Rows: 192, Slices: 20, PixelSpacing: 0.8, SliceThickness: 2, Center: dosemap.Vec3{0, 0, 20}},
		SimSpacing:  1.2, MarginMM: 3, Threshold: 240,
	}
	for kz := 0; kz < 4; kz++ {
		for kx := 0; kx < 6; kx++ {
			s.Planned = append(s.Planned, centre.Add(dosemap.Vec3{(float64(kx) - 2.5) * 3.6, 0, (float64(kz) - 1.5) * 3}))
		}
	}
	for k := range s.Planned {
		s.Sonications = append(s.Sonications, SonicationSpec{Planned: k + 1, Focus: s.Planned[k], Power: demoPower, Duration: 18, Cooling: 40})
	}
	return s
}

// WriteTypical writes TypicalSession(seed) into dir (created if missing).
func WriteTypical(dir string, seed uint64) (*Truth, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("creating %s: %w", dir, err)
	}
	return WriteSession(dir, TypicalSession(seed))
}

// ShortGapSession returns an invented session on the demo's phantom and
// plan with every one of the 16 planned spots delivered, in order, each
// sonication starting cooling seconds after the last frame of the one
// before (the demo waits 120 s). With short gaps the heat of the earlier
// sonications is still present at each baseline, where the thermometry
// cannot see it; the truth records it per sonication (HiddenRiseC) and the
// dose with it counted (MeasuredTruth.WithHiddenHeat).
func ShortGapSession(cooling float64) *Session {
	s := DemoSession()
	s.Label = fmt.Sprintf("gap-%gs", cooling)
	s.Description = fmt.Sprintf("Invented session on the demo phantom: all 16 planned spots delivered in order, "+
		"%g s of cooling between sonications (residual heat hidden from the thermometry).", cooling)
	s.PatientName, s.PatientID = "PHANTOM^GAP", fmt.Sprintf("GAP-%03.0f", cooling)
	s.Seed = DemoSeed + uint64(cooling*10)
	s.Motion = nil
	s.Sonications = nil
	for n, q := range s.Planned {
		s.Sonications = append(s.Sonications, SonicationSpec{Planned: n + 1, Focus: q, Power: demoPower, Duration: demoDuration, Cooling: cooling})
	}
	return s
}
