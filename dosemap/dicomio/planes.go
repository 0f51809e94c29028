package dicomio

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"

	"dosecover/dosemap"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// Planes acquired together.
//
// Thermometry is often acquired on a few planes through the focus at once
// (across the beam and along it), either as one series whose frames lie in
// several orientations or as one series per plane acquired at the same
// time. The frames of one series are split into stacks by their StackID
// (0020,9056) when every frame of an enhanced image carries one, else by
// orientation (ImageOrientationPatient); stacks and series of one frame of
// reference whose frame times overlap form one sonication with several
// stacks.

// StackInfo describes one stack (a set of parallel slices) of a sonication.
type StackInfo struct {
	Series      string       `json:"series"`      // SeriesInstanceUID
	Description string       `json:"description"` // SeriesDescription
	Orientation string       `json:"orientation"` // axial, coronal, sagittal or oblique (near ...)
	Slices      int          `json:"slices"`
	Frames      int          `json:"frames"`
	Center      dosemap.Vec3 `json:"centerMm"` // centre of the stack, patient mm (LPS)
	Normal      dosemap.Vec3 `json:"normal"`   // unit normal of the slices
	// StackID is the StackID (0020,9056) of the stack's frames in an
	// enhanced image; "" when the stack was found by orientation.
	StackID string `json:"stackId,omitempty"`
}

func stackInfo(st *stack, s *series) StackInfo {
	g := st.Geometry
	return StackInfo{Series: s.info.UID, Description: s.info.Description, Orientation: orientationName(g),
		Slices: g.Slices, Frames: len(st.Grid),
		Center: g.Point(float64(g.Cols-1)/2, float64(g.Rows-1)/2, float64(g.Slices-1)/2), Normal: g.Normal,
		StackID: st.StackID}
}

// splitStacks splits the frames of one series into stacks and returns
// the StackID of each ("" when split by orientation) and the problems
// found, for the caller to name the series.
//
// Enhanced images say which stack a frame belongs to: StackID (0020,9056)
// and InStackPositionNumber (0020,9057) in the Frame Content Sequence of
// each frame (PS3.3 C.7.6.16.2.2, Frame Content Macro: the frames of one
// stack share a StackID; InStackPositionNumber, required with StackID,
// numbers the frames of a stack in order of position, 1 at one end; the
// ordering rule from memory). When every frame
// carries a StackID, the frames of each StackID form a stack (the largest
// first, ties in StackID order); parallel stacks at different positions in
// one series stay apart this way. A StackID that disagrees with the planes
// (one StackID in two orientations, two StackIDs on one plane) or frames
// only some of which carry one are a problem, and the frames are split by
// orientation instead (splitOrientations). InStackPositionNumbers that do
// not follow the positions along the normal are a problem; the slices are
// ordered by position (ImagePositionPatient) either way.
func splitStacks(frames []frameRef) (groups [][]frameRef, ids []string, problems []string) {
	byOrientation := func() ([][]frameRef, []string, []string) {
		g := splitOrientations(frames)
		return g, make([]string, len(g)), problems
	}
	with := 0
	var without frameRef
	for _, r := range frames {
		if r.meta().StackID != "" {
			with++
		} else if without.fi == nil {
			without = r
		}
	}
	if with == 0 {
		return byOrientation()
	}
	if with < len(frames) {
		problems = append(problems, fmt.Sprintf("%d of %d frames carry a %s and %d do not (%s); stacks are split by %s instead",
			with, len(frames), tagName(tagStackID), len(frames)-with, frameName(without), tagName(tag.ImageOrientationPatient)))
		return byOrientation()
	}
	index := map[string]int{}
	for _, r := range frames {
		id := r.meta().StackID
		n, ok := index[id]
		if !ok {
			n = len(groups)
			index[id] = n
			groups = append(groups, nil)
			ids = append(ids, id)
		}
		groups[n] = append(groups[n], r)
	}
	// One orientation per StackID.
	for n, g := range groups {
		m0 := g[0].meta()
		for _, r := range g[1:] {
			if m := r.meta(); m.Row.Sub(m0.Row).Norm() > 1e-3 || m.Col.Sub(m0.Col).Norm() > 1e-3 {
				problems = append(problems, fmt.Sprintf("%s %q holds frames in two orientations (%s: %s %s, %s: %s); stacks are split by orientation instead",
					tagName(tagStackID), ids[n], frameName(g[0]), tagName(tag.ImageOrientationPatient), iopText(m0), frameName(r), iopText(m)))
				return byOrientation()
			}
		}
	}
	// No two StackIDs on one plane: compare the distinct slice positions
	// (one frame each) of stacks of one orientation.
	type plane struct {
		pos float64
		r   frameRef
	}
	planesOf := func(g []frameRef, normal dosemap.Vec3) []plane {
		var out []plane
		for _, r := range g {
			p := r.meta().IPP.Dot(normal)
			if !slices.ContainsFunc(out, func(q plane) bool { return math.Abs(q.pos-p) <= posTol }) {
				out = append(out, plane{p, r})
			}
		}
		return out
	}
	for a := range groups {
		for b := a + 1; b < len(groups); b++ {
			ma, mb := groups[a][0].meta(), groups[b][0].meta()
			if ma.Row.Sub(mb.Row).Norm() > 1e-3 || ma.Col.Sub(mb.Col).Norm() > 1e-3 {
				continue
			}
			normal := ma.Row.Cross(ma.Col).Unit()
			pbs := planesOf(groups[b], normal)
			for _, pa := range planesOf(groups[a], normal) {
				for _, pb := range pbs {
					if math.Abs(pa.pos-pb.pos) <= posTol {
						problems = append(problems, fmt.Sprintf("StackIDs %s %q and %q both hold the plane at %.2f mm along the normal (%s and %s); stacks are split by orientation instead",
							tagStackID, ids[a], ids[b], pa.pos, frameName(pa.r), frameName(pb.r)))
						return byOrientation()
					}
				}
			}
		}
	}
	for n, g := range groups {
		if p := checkInStackPositions(g); p != "" {
			problems = append(problems, fmt.Sprintf("%s %q: %s", tagName(tagStackID), ids[n], p))
		}
	}
	order := make([]int, len(groups))
	for n := range order {
		order[n] = n
	}
	sort.SliceStable(order, func(a, b int) bool {
		ga, gb := groups[order[a]], groups[order[b]]
		if len(ga) != len(gb) {
			return len(ga) > len(gb)
		}
		return stackIDLess(ids[order[a]], ids[order[b]])
	})
	sortedGroups := make([][]frameRef, len(groups))
	sortedIDs := make([]string, len(groups))
	for n, o := range order {
		sortedGroups[n], sortedIDs[n] = groups[o], ids[o]
	}
	return sortedGroups, sortedIDs, problems
}

// stackIDLess orders StackIDs numerically when both are numbers, else as
// text.
func stackIDLess(a, b string) bool {
	x, errA := strconv.Atoi(a)
	y, errB := strconv.Atoi(b)
	if errA == nil && errB == nil {
		return x < y
	}
	return a < b
}

// checkInStackPositions checks the InStackPositionNumbers of the frames of
// one stack (one orientation) against their positions along the normal:
// every frame carries one, frames of one number lie on one plane, frames
// of different numbers on different planes, in the order of the numbers
// (either direction). It returns what is wrong, or "".
func checkInStackPositions(g []frameRef) string {
	m0 := g[0].meta()
	normal := m0.Row.Cross(m0.Col).Unit()
	pos := map[int]float64{}
	first := map[int]frameRef{}
	for _, r := range g {
		m := r.meta()
		if m.InStackPos == 0 {
			return fmt.Sprintf("%s has no %s (required with a StackID); slices are ordered by position", frameName(r), tagName(tagInStackPosition))
		}
		p := m.IPP.Dot(normal)
		if q, ok := pos[m.InStackPos]; ok {
			if math.Abs(p-q) > posTol {
				return fmt.Sprintf("%s %d is at %.2f mm along the normal in %s and at %.2f mm in %s; slices are ordered by position",
					tagName(tagInStackPosition), m.InStackPos, q, frameName(first[m.InStackPos]), p, frameName(r))
			}
			continue
		}
		pos[m.InStackPos], first[m.InStackPos] = p, r
	}
	nums := make([]int, 0, len(pos))
	for k := range pos {
		nums = append(nums, k)
	}
	sort.Ints(nums)
	sign := 0.0
	for n := 1; n < len(nums); n++ {
		d := pos[nums[n]] - pos[nums[n-1]]
		s := math.Copysign(1, d)
		if math.Abs(d) <= posTol || (sign != 0 && s != sign) {
			return fmt.Sprintf("%s %d (%s, %.2f mm along the normal) and %d (%s, %.2f mm) do not follow the slice positions; slices are ordered by position",
				tagName(tagInStackPosition), nums[n-1], frameName(first[nums[n-1]]), pos[nums[n-1]], nums[n], frameName(first[nums[n]]), pos[nums[n]])
		}
		sign = s
	}
	return ""
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
		if u.kind != "phase" {
			// Temperature and dose maps are not grouped: one acquired
			// with another acquisition is named, as it may be the same
			// sonication counted twice.
			for _, k := range keep {
				if timeOverlap(k.data, u.data) {
					cr.inv.problem("series %s (%s) was acquired at the same time as series %s (%s); the two cannot be grouped into one sonication and are read as two (check that they are not the same sonication twice)",
						u.phase.name(), kindText(u.kind), k.phase.name(), kindText(k.kind))
				}
			}
		}
		if u.kind == "phase" {
			for _, k := range keep {
				if !timeOverlap(k.data, u.data) {
					continue
				}
				if k.kind != "phase" {
					cr.inv.problem("series %s (%s) was acquired at the same time as series %s (%s); the two cannot be grouped into one sonication and are read as two (check that they are not the same sonication twice)",
						u.phase.name(), kindText(u.kind), k.phase.name(), kindText(k.kind))
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

// kindText names the kind of a unit's data for a message.
func kindText(kind string) string {
	switch kind {
	case "phase":
		return "thermometry"
	case "temperature":
		return "temperature maps"
	case "dose":
		return "dose map"
	}
	return kind
}

func stacksOf(u *unit) []*stack {
	out := make([]*stack, len(u.stacks))
	for n, s := range u.stacks {
		out[n] = s.data
	}
	return out
}

// oneFrameOfReference keeps the files of series s in one frame of
// reference: positions in different frames of reference cannot be related
// (PS3.3 C.7.4.1.1.1), so the files whose FrameOfReferenceUID differs from
// that of most files of the series (ties: the first file's) are refused,
// each listed as skipped with both UIDs, and the series is named in a
// problem. Files without a FrameOfReferenceUID stay (checkFrames names a
// series without one).
func (cr *caseReader) oneFrameOfReference(s *series) {
	count := map[string]int{}
	var order []string
	for _, fi := range s.files {
		if fi.FrameOfRef == "" {
			continue
		}
		if count[fi.FrameOfRef] == 0 {
			order = append(order, fi.FrameOfRef)
		}
		count[fi.FrameOfRef]++
	}
	if len(order) < 2 {
		return
	}
	keep := order[0]
	for _, u := range order[1:] {
		if count[u] > count[keep] {
			keep = u
		}
	}
	var files []*fileInfo
	var paths []string
	refused := 0
	first := ""
	for n, fi := range s.files {
		if fi.FrameOfRef == "" || fi.FrameOfRef == keep {
			files = append(files, fi)
			paths = append(paths, s.info.Paths[n])
			continue
		}
		refused++
		if first == "" {
			first = cr.rel(fi.Path)
		}
		cr.inv.Skipped = append(cr.inv.Skipped, SkippedFile{Path: cr.rel(fi.Path), Reason: fmt.Sprintf(
			"%s %s differs from the %s of the other files of series %s; its positions cannot be related to theirs",
			tagName(tag.FrameOfReferenceUID), fi.FrameOfRef, keep, s.name())})
	}
	cr.inv.problem("series %s: %d of its %d files (%s%s) lie in another frame of reference than the others (%s); they are not used",
		s.name(), refused, len(s.files), first, andMore(refused-1), keep)
	s.files, s.info.Paths = files, paths
	s.info.FrameOfRef = keep
}
