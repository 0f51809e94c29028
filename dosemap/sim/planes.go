package sim

import (
	"fmt"
	"os"
	"time"

	"dosecover/dosemap"
)

// Layout is how the thermometry of a simulated session is placed.
type Layout int

// Layouts of the thermometry planes.
const (
	// LayoutSlab: every sonication on one shared axial slab
	// (Protocol.Center), one series per sonication.
	LayoutSlab Layout = iota
	// LayoutMovingSlab: an axial slab of Protocol.Slices slices centred
	// on each sonication's focus depth (the in-plane field of view stays
	// at Protocol.Center), one series per sonication.
	LayoutMovingSlab
	// LayoutTwoPlanes: a coronal and a sagittal plane (one slice of
	// Protocol.SliceThickness each) through each focus, both in one phase
	// series and one magnitude series per sonication.
	LayoutTwoPlanes
	// LayoutTwoPlaneSeries: the same planes, one series per plane
	// (magnitude and phase in each), acquired at the same time.
	LayoutTwoPlaneSeries
)

// String names the layout as the demo command does.
func (l Layout) String() string {
	switch l {
	case LayoutMovingSlab:
		return "moving-slab"
	case LayoutTwoPlanes:
		return "two-planes"
	case LayoutTwoPlaneSeries:
		return "two-plane-series"
	}
	return "slab"
}

// seriesLayout describes the layout for truth.json.
func (l Layout) seriesLayout() string {
	switch l {
	case LayoutMovingSlab:
		return "one series per sonication holding magnitude and phase images of an axial slab centred on the focus depth"
	case LayoutTwoPlanes:
		return "per sonication a coronal and a sagittal plane through the focus: one phase series and one magnitude series each holding both planes"
	case LayoutTwoPlaneSeries:
		return "per sonication a coronal and a sagittal plane through the focus: one series per plane holding magnitude and phase images"
	}
	return "one series per sonication holding magnitude and phase images (ImageType value 3 M or P, ComplexImageComponent MAGNITUDE or PHASE)"
}

// StackGeometries returns the grids on which sonication n (0-based) is
// measured.
func (s *Session) StackGeometries(n int) []dosemap.Geometry {
	p := s.Thermometry
	f := s.Sonications[n].Focus
	switch s.Layout {
	case LayoutMovingSlab:
		sp := dosemap.Vec3{p.PixelSpacing, p.PixelSpacing, p.SliceThickness}
		return []dosemap.Geometry{centredAxial(p.Cols, p.Rows, p.Slices, sp, dosemap.Vec3{p.Center[0], p.Center[1], f[2]})}
	case LayoutTwoPlanes, LayoutTwoPlaneSeries:
		plane := func(row, col dosemap.Vec3) dosemap.Geometry {
			g := dosemap.Geometry{Cols: p.Cols, Rows: p.Rows, Slices: 1,
				Spacing: dosemap.Vec3{p.PixelSpacing, p.PixelSpacing, p.SliceThickness},
				Row:     row, Col: col, Normal: row.Cross(col)}
			g.Origin = f.Sub(row.Scale(float64(p.Cols-1) / 2 * p.PixelSpacing)).Sub(col.Scale(float64(p.Rows-1) / 2 * p.PixelSpacing))
			return g
		}
		down := dosemap.Vec3{0, 0, -1}
		return []dosemap.Geometry{
			plane(dosemap.Vec3{1, 0, 0}, down), // coronal: across the beam (the beam runs along y)
			plane(dosemap.Vec3{0, 1, 0}, down), // sagittal: along the beam
		}
	}
	return []dosemap.Geometry{s.ThermometryGeometry()}
}

// PlanesSession returns an invented session of 35 sonications measured on
// their own planes (layout l): the 25 mm lesion of TypicalSession treated
// on five depths 3 mm apart with spots 3 mm apart across the beam; the two
// planned spots at the lesion's +x edge on the middle depth are never
// delivered (a hole), sonication 30 lands 10.5 mm beyond the lesion's −x
// edge (a spill beyond the 3 mm margin), and the last three repeat central
// spots at lower power. The spots get three quarters of the demo's power. Two minutes of unimaged cooling separate the
// sonications, as in the demo.
func PlanesSession(l Layout, seed uint64) *Session {
	centre := dosemap.Vec3{-3, -10, 20}
	lesion := Ellipsoid{Center: centre, SemiAxes: dosemap.Vec3{12.5, 9, 7.5}}
	p := baseProtocol(centre)
	p.Cols, p.Rows, p.Frames = 96, 96, 12
	p.Slices, p.SliceThickness = 3, 3
	if l == LayoutTwoPlanes || l == LayoutTwoPlaneSeries {
		p.Slices = 1
	}
	s := &Session{
		Label:  "planes-" + l.String(),
		Layout: l,
		Description: fmt.Sprintf("Invented session measured on its own planes (%s): 25 mm lesion, 35 sonications on five depths; "+
			"the two planned spots at the +x edge of the middle depth never delivered, sonication 30 landed 10.5 mm beyond the lesion's -x edge.", l),
		PatientName: "PHANTOM^PLANES", PatientID: "PLANES-001", Seed: seed,
		Start: time.Date(2026, 4, 7, 9, 0, 0, 0, time.UTC),
		Phantom: Phantom{Center: dosemap.Vec3{0, 0, 20}, Radius: 70, Tissue: GelPhantom, BodyTemp: 37, Lesion: lesion,
			Avoid: Tube{Center: dosemap.Vec3{-30, -8, 20}, Radius: 3}},
		Thermometry: p,
		Anatomy:     AnatomyProtocol{Cols: 160, Rows: 160, Slices: 20, PixelSpacing: 0.9, SliceThickness: 2, Center: dosemap.Vec3{0, 0, 20}},
		SimSpacing:  1.2, MarginMM: 3, Threshold: 240,
	}
	var skip []int
	for kz := -2; kz <= 2; kz++ {
		for kx := -4; kx <= 4; kx++ {
			q := centre.Add(dosemap.Vec3{float64(kx) * 3, 0, float64(kz) * 3})
			if lesion.Contains(q) {
				s.Planned = append(s.Planned, q)
				if kz == 0 && kx >= 3 {
					skip = append(skip, len(s.Planned))
				}
			}
		}
	}
	for k := range s.Planned {
		if k+1 == skip[0] || k+1 == skip[1] {
			continue // never delivered
		}
		if len(s.Sonications) == 29 {
			miss := dosemap.Vec3{centre[0] - lesion.SemiAxes[0] - 10.5, centre[1], centre[2]}
			s.Sonications = append(s.Sonications, SonicationSpec{Focus: miss, Power: demoPower, Duration: demoDuration, Cooling: demoCooling, Spill: true})
		}
		s.Sonications = append(s.Sonications, SonicationSpec{Planned: k + 1, Focus: s.Planned[k], Power: 0.75 * demoPower, Duration: demoDuration, Cooling: demoCooling})
	}
	for k := 0; len(s.Sonications) < 35; k++ {
		c := len(s.Planned)/2 - 1 + k
		s.Sonications = append(s.Sonications, SonicationSpec{Planned: c + 1, Focus: s.Planned[c], Power: 0.6 * demoPower, Duration: demoDuration, Cooling: demoCooling})
	}
	return s
}

// WritePlanes writes PlanesSession(l, seed) into dir (created if missing).
func WritePlanes(dir string, l Layout, seed uint64) (*Truth, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("creating %s: %w", dir, err)
	}
	return WriteSession(dir, PlanesSession(l, seed))
}
