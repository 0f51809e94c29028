package dicomio

import (
	"fmt"
	"math"
	"sort"

	"dosecover/dosemap"
)

// Planes acquired together.
//
// Thermometry is often acquired on a few planes through the focus at once
// (across the beam and along it), either as one series whose frames lie in
// several orientations or as one series per plane acquired at the same
// time. The frames of one series are split into stacks by orientation
// (ImageOrientationPatient); stacks and series of one frame of reference
// whose frame times overlap form one sonication with several stacks.

// StackInfo describes one stack (a set of parallel slices) of a sonication.
type StackInfo struct {
	Series      string       `json:"series"`      // SeriesInstanceUID
	Description string       `json:"description"` // SeriesDescription
	Orientation string       `json:"orientation"` // axial, coronal, sagittal or oblique (near ...)
	Slices      int          `json:"slices"`
	Frames      int          `json:"frames"`
	Center      dosemap.Vec3 `json:"centerMm"` // centre of the stack, patient mm (LPS)
	Normal      dosemap.Vec3 `json:"normal"`   // unit normal of the slices
}

func stackInfo(st *stack, s *series) StackInfo {
	g := st.Geometry
	return StackInfo{Series: s.info.UID, Description: s.info.Description, Orientation: orientationName(g),
		Slices: g.Slices, Frames: len(st.Grid),
		Center: g.Point(float64(g.Cols-1)/2, float64(g.Rows-1)/2, float64(g.Slices-1)/2), Normal: g.Normal}
}

// splitOrientations splits frames into groups of one orientation (row and
// column directions within 1e-3), the largest group first (ties in order
// of the normal's components), frames in their given order within a group.
func splitOrientations(frames []frameRef) [][]frameRef {
	var groups [][]frameRef
next:
	for _, r := range frames {
		m := r.meta()
		for n, g := range groups {
			m0 := g[0].meta()
			if m.Row.Sub(m0.Row).Norm() <= 1e-3 && m.Col.Sub(m0.Col).Norm() <= 1e-3 {
				groups[n] = append(groups[n], r)
				continue next
			}
		}
		groups = append(groups, []frameRef{r})
	}
	if len(groups) == 0 {
		return [][]frameRef{nil}
	}
	sort.SliceStable(groups, func(a, b int) bool {
		if len(groups[a]) != len(groups[b]) {
			return len(groups[a]) > len(groups[b])
		}
		na := groups[a][0].meta().Row.Cross(groups[a][0].meta().Col)
		nb := groups[b][0].meta().Row.Cross(groups[b][0].meta().Col)
		for i := 0; i < 3; i++ {
			if math.Abs(na[i]-nb[i]) > 1e-6 {
				return math.Abs(na[i]) > math.Abs(nb[i])
			}
		}
		return false
	})
	return groups
}

// timeOverlap reports whether the frame times of a and b overlap (both
// must carry times on the same scale).
func timeOverlap(a, b *stack) bool {
	if !a.HasTimes || !b.HasTimes || a.Dated != b.Dated || len(a.Times) == 0 || len(b.Times) == 0 {
		return false
	}
	a0, a1 := a.Times[0], a.Times[len(a.Times)-1]
	b0, b1 := b.Times[0], b.Times[len(b.Times)-1]
	return a0 <= b1 && b0 <= a1
}

// groupAcquiredTogether merges phase acquisitions whose frame times
// overlap into one sonication with several stacks: the series with the
// lowest number keeps the sonication, the others become further stacks.
// Overlapping acquisitions that cannot be merged (another frame of
// reference, or the same plane twice) stay separate sonications and are
// named in the problems.
func (cr *caseReader) groupAcquiredTogether() {
	var keep []*unit
	for _, u := range cr.units {
		merged := false
		if u.kind == "phase" {
			for _, k := range keep {
				if k.kind != "phase" || !timeOverlap(k.data, u.data) {
					continue
				}
				if a, b := k.phase.info.FrameOfRef, u.phase.info.FrameOfRef; a != "" && b != "" && a != b {
					cr.inv.problem("series %s was acquired at the same time as series %s but in another frame of reference (%s, %s); its stack cannot be grouped with that sonication and is read as a sonication of its own",
						u.phase.name(), k.phase.name(), b, a)
					continue
				}
				same := false
				for _, st := range append([]*stack{k.data}, stacksOf(k)...) {
					for _, s2 := range append([]*stack{u.data}, stacksOf(u)...) {
						if st.Geometry.SameGrid(s2.Geometry, posTol) {
							same = true
						}
					}
				}
				if same {
					cr.inv.problem("series %s and series %s were acquired at the same time on the same plane; they cannot be grouped into one sonication and are read as two (check for a duplicated export)",
						k.phase.name(), u.phase.name())
					continue
				}
				k.stacks = append(k.stacks, unitStack{data: u.data, mag: u.mag, s: u.phase})
				k.stacks = append(k.stacks, u.stacks...)
				u.phase.info.Note = fmt.Sprintf("acquired with series %s: read as further planes of the same sonication", k.phase.name())
				merged = true
				break
			}
		}
		if !merged {
			keep = append(keep, u)
		}
	}
	cr.units = keep
}

func stacksOf(u *unit) []*stack {
	out := make([]*stack, len(u.stacks))
	for n, s := range u.stacks {
		out[n] = s.data
	}
	return out
}
