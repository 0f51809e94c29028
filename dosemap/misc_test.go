package dosemap

import (
	"math"
	"strings"
	"testing"
)

func TestModelsDescribeThemselves(t *testing.T) {
	// Common practice: 240 CEM43 (Sapareto & Dewey 1984) and Ω = 1
	// (Henriques & Moritz 1947) are the conventional lethal levels.
	cases := []struct {
		m         DoseModel
		name      string
		unit      string
		threshold float64
	}{
		{DefaultCEM43(), "CEM43", "CEM43", 240},
		{DefaultArrhenius(), "Arrhenius (skin)", "Omega", 1},
		{Arrhenius{A: 1, Ea: 1}, "Arrhenius", "Omega", 1},
	}
	for _, c := range cases {
		if c.m.Name() != c.name || c.m.Unit() != c.unit || c.m.DefaultThreshold() != c.threshold {
			t.Errorf("%T: %q %q %g", c.m, c.m.Name(), c.m.Unit(), c.m.DefaultThreshold())
		}
	}
	if _, ok := ArrheniusSet("no such tissue"); ok {
		t.Error("unknown Arrhenius set found")
	}
	for _, a := range ArrheniusSets {
		if a.Source == "" || a.Tissue == "" || !(a.A > 0) || !(a.Ea > 0) {
			t.Errorf("incomplete Arrhenius set %+v", a)
		}
	}
	if RuleTrapezoid.String() != "trapezoid" || RuleRectangle.String() != "rectangle" {
		t.Error("TimeRule names")
	}
	if DriftNone.String() != "none" || DriftMean.String() != "mean" || DriftPolynomial.String() != "polynomial" {
		t.Error("DriftMethod names")
	}
}

func TestArrheniusRate(t *testing.T) {
	// Closed form A·exp(−Ea/(R·T)), T = 50 °C + 273.15 K; 1e-12 relative.
	a := DefaultArrhenius()
	want := a.A * math.Exp(-a.Ea/(GasConstant*323.15))
	if r := a.Rate(50); relErr(r, want) > 1e-12 {
		t.Errorf("Rate(50) = %g, want %g", r, want)
	}
}

func TestZeroValuesTakeDefaults(t *testing.T) {
	// CEM43{} is the Sapareto–Dewey model; ThermometryOptions{} behaves as
	// DefaultThermometryOptions except for the drift method (zero: none).
	ts := constSeries([]float64{0, 60}, 44, 41)
	a, b := CEM43{}.Dose(ts), DefaultCEM43().Dose(ts)
	if a.Data[0] != b.Data[0] || a.Data[1] != b.Data[1] {
		t.Errorf("CEM43{} %v, default %v", a.Data, b.Data)
	}
	p := newPhantom(16, 5)
	p.rise = hotSpot(5, 2, 2)
	s := p.sonication(true)
	def := DefaultThermometryOptions()
	def.Drift = DriftNone
	x, err1 := Thermometry(s, ThermometryOptions{})
	y, err2 := Thermometry(s, def)
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	for f := range x.Frames {
		for n := range x.Frames[f] {
			u, v := x.Frames[f][n], y.Frames[f][n]
			if !(u == v || u != u && v != v) {
				t.Fatalf("frame %d voxel %d: zero options %g, defaults %g", f, n, u, v)
			}
		}
	}
}

func TestThermometryNaNInputAndSmallReference(t *testing.T) {
	p := newPhantom(16, 6)
	s := p.sonication(true)
	c := p.g.Index(8, 8, 0)
	s.Phase[3][c] = float32(math.NaN())
	opt := DefaultThermometryOptions()
	// A reference of four voxels cannot determine a first-order polynomial
	// (3 terms need at least 9): the frame says so and stays uncorrected.
	opt.Reference = make([]bool, p.g.Len())
	for _, n := range []int{p.g.Index(8, 2, 0), p.g.Index(2, 8, 0), p.g.Index(13, 8, 0), p.g.Index(8, 13, 0)} {
		opt.Reference[n] = true
	}
	ts, err := Thermometry(s, opt)
	if err != nil {
		t.Fatal(err)
	}
	if v := ts.Frames[3][c]; v == v {
		t.Errorf("NaN phase gave %g °C", v)
	}
	if v := ts.Frames[4][c]; math.Abs(float64(v)-37) > 1e-3 {
		t.Errorf("next frame %g °C, want 37", v)
	}
	if !strings.Contains(ts.Quality[2].Note, "drift not corrected") {
		t.Errorf("note %q does not report the failed drift fit", ts.Quality[2].Note)
	}
}

func TestCaseHelpers(t *testing.T) {
	s := &Sonication{Phase: make([][]float32, 4)}
	d := &Sonication{Dose: []float32{1}}
	if s.Frames() != 4 || d.Frames() != 1 || (&Sonication{}).Frames() != 0 {
		t.Error("Sonication.Frames")
	}
	c := &Case{Structures: []Structure{{Name: "a"}, {Name: "b", Role: RoleTarget}}}
	if c.Target() == nil || c.Target().Name != "b" || (&Case{}).Target() != nil {
		t.Error("Case.Target")
	}
	if RoleTarget.String() != "target" || RoleAvoid.String() != "avoid" || RoleOther.String() != "other" {
		t.Error("StructureRole names")
	}
	g := NewAxialGeometry(2, 3, 4, Vec3{0.5, 2, 3}, Vec3{})
	if g.VoxelVolume() != 3 || g.Len() != 24 || g.SliceLen() != 6 {
		t.Error("Geometry sizes")
	}
	if !strings.Contains(g.String(), "2×3×4") {
		t.Errorf("Geometry.String %q", g.String())
	}
}
