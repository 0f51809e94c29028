package sim

import (
	"context"
	"math"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
)

// The demo read back by dosecover's own reader lists every sonication, the
// anatomy and both structures with the geometry that was written, and the
// phase arrives in radians.
func TestDemoRoundTrip(t *testing.T) {
	dir, tr := demo(t)
	c, inv, err := dicomio.Load(context.Background(), dir, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !inv.Reviewable {
		t.Fatalf("demo not reviewable: %s", inv.NotReviewable)
	}
	if len(inv.Problems) > 0 {
		t.Errorf("reader problems: %v", inv.Problems)
	}
	for _, sk := range inv.Skipped {
		if sk.Path != TruthFile {
			t.Errorf("skipped %s: %s", sk.Path, sk.Reason)
		}
	}
	s := DemoSession()
	if c.Anatomy == nil || !c.Anatomy.Geometry.SameGrid(s.AnatomyGeometry(), 1e-3) {
		t.Fatalf("anatomy geometry %v, want %v", c.Anatomy, s.AnatomyGeometry())
	}
	if c.FrameOfRef != tr.FrameOfReferenceUID || c.WindowWidth <= 0 {
		t.Errorf("frame of reference %s, window %g/%g", c.FrameOfRef, c.WindowCenter, c.WindowWidth)
	}
	if c.Patient.Name != "PHANTOM^GEL" || c.Patient.ID != "DEMO-001" {
		t.Errorf("patient %+v", c.Patient)
	}
	if len(c.Sonications) != len(tr.Sonications) {
		t.Fatalf("%d sonications read, %d written", len(c.Sonications), len(tr.Sonications))
	}
	tg := s.ThermometryGeometry()
	for n, so := range c.Sonications {
		want := tr.Sonications[n]
		if so.SeriesUID != want.SeriesUID || so.Number != n+1 {
			t.Errorf("sonication %d: series %s number %d, want %s", n+1, so.SeriesUID, so.Number, want.SeriesUID)
		}
		if !so.Geometry.SameGrid(tg, 1e-3) {
			t.Errorf("sonication %d geometry %v, want %v", n+1, so.Geometry, tg)
		}
		if so.Frames() != s.Thermometry.Frames || len(so.Magnitude) != s.Thermometry.Frames {
			t.Errorf("sonication %d: %d phase and %d magnitude frames", n+1, so.Frames(), len(so.Magnitude))
		}
		if math.Abs(so.B0-3) > 1e-9 || math.Abs(so.TE-0.0128) > 1e-9 || so.FrameOfRef != tr.FrameOfReferenceUID {
			t.Errorf("sonication %d: B0 %g TE %g frame %s", n+1, so.B0, so.TE, so.FrameOfRef)
		}
		if len(so.Times) > 1 && math.Abs(so.Times[1]-s.Thermometry.FrameInterval) > 0.05 {
			t.Errorf("sonication %d frame interval %g s", n+1, so.Times[1])
		}
		if !so.Start.Equal(want.Start) {
			t.Errorf("sonication %d starts %v, want %v", n+1, so.Start, want.Start)
		}
	}
	// Phase in radians within [−π, π).
	ph := c.Sonications[0].Phase[0]
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range ph {
		lo, hi = math.Min(lo, float64(v)), math.Max(hi, float64(v))
	}
	if lo < -math.Pi-1e-6 || hi >= math.Pi || hi-lo < 5 {
		t.Errorf("phase range [%g, %g] rad", lo, hi)
	}
	// Structures: the target (PTV) and the avoid tube (AVOIDANCE).
	if len(c.Structures) != 2 {
		t.Fatalf("%d structures", len(c.Structures))
	}
	target, avoid, _ := s.Contours()
	roles := map[dosemap.StructureRole]dosemap.Structure{}
	for _, st := range c.Structures {
		roles[st.Role] = st
	}
	if st := roles[dosemap.RoleTarget]; st.InterpretedType != "PTV" || len(st.Contours) != len(target) {
		t.Errorf("target: %q with %d contours, want PTV with %d", st.InterpretedType, len(st.Contours), len(target))
	} else {
		p, q := st.Contours[0].Points[5], target[0].Points[5]
		if p.Sub(q).Norm() > 1e-3 {
			t.Errorf("target vertex %v, want %v", p, q)
		}
	}
	if st := roles[dosemap.RoleAvoid]; st.InterpretedType != "AVOIDANCE" || len(st.Contours) != len(avoid) {
		t.Errorf("avoid: %q with %d contours, want AVOIDANCE with %d", st.InterpretedType, len(st.Contours), len(avoid))
	}
}
