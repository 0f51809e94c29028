package dicomio

import (
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strings"

	"dosecover/dosemap"
)

// frameRef is one frame of one file.
type frameRef struct {
	fi *fileInfo
	n  int
}

func (r frameRef) meta() *frameMeta { return &r.fi.Frames[r.n] }

// stack is a set of frames arranged as time points × slices on one grid.
type stack struct {
	Geometry dosemap.Geometry
	Times    []float64 // absolute seconds (since 1970, or of day when undated) per time point
	Dated    bool
	HasTimes bool
	Grid     [][]*frameRef // [time][slice]; nil where a frame is missing
	Missing  int
	Problems []string
	StackID  string // StackID (0020,9056) of its frames; "" when split by orientation
}

// posTol is the distance (mm) under which two slice positions are the same
// slice; spacing deviations above max(posTol, 1 % of the spacing) count as
// uneven.
const posTol = 0.01

// buildStack arranges frames on a grid: orientation and pixel grid must be
// the same for all; slices are ordered by position along the normal
// Row×Col; time points come from TemporalPositionIdentifier/Index when every
// frame has one, else from the order of acquisition times at each slice.
// Problems that leave the data usable (uneven spacing, duplicates, missing
// frames) are returned in stack.Problems; an error means the frames do not
// form a grid.
func buildStack(frames []frameRef) (*stack, error) {
	if len(frames) == 0 {
		return nil, fmt.Errorf("no image frames")
	}
	f0 := frames[0].meta()
	rows, cols := frames[0].fi.Rows, frames[0].fi.Cols
	for _, r := range frames[1:] {
		m := r.meta()
		if m.Row.Sub(f0.Row).Norm() > 1e-3 || m.Col.Sub(f0.Col).Norm() > 1e-3 {
			return nil, fmt.Errorf("mixed orientations in one series: %s has ImageOrientationPatient %s, %s has %s",
				filepath.Base(frames[0].fi.Path), iopText(f0), filepath.Base(r.fi.Path), iopText(m))
		}
		if r.fi.Rows != rows || r.fi.Cols != cols {
			return nil, fmt.Errorf("mixed image sizes in one series: %s is %d×%d, %s is %d×%d",
				filepath.Base(frames[0].fi.Path), cols, rows, filepath.Base(r.fi.Path), r.fi.Cols, r.fi.Rows)
		}
		if math.Abs(m.Spacing[0]-f0.Spacing[0]) > 1e-4 || math.Abs(m.Spacing[1]-f0.Spacing[1]) > 1e-4 {
			return nil, fmt.Errorf("mixed pixel spacings in one series: %s has %g\\%g mm, %s has %g\\%g mm",
				filepath.Base(frames[0].fi.Path), f0.Spacing[0], f0.Spacing[1], filepath.Base(r.fi.Path), m.Spacing[0], m.Spacing[1])
		}
	}
	st := &stack{}
	normal := f0.Row.Cross(f0.Col).Unit()
	// Distinct slice positions along the normal.
	type pf struct {
		pos float64
		r   frameRef
	}
	all := make([]pf, len(frames))
	for n, r := range frames {
		all[n] = pf{r.meta().IPP.Dot(normal), r}
	}
	sort.SliceStable(all, func(a, b int) bool { return all[a].pos < all[b].pos })
	var positions []float64
	var bySlice [][]frameRef
	var ipps []dosemap.Vec3
	for _, p := range all {
		if len(positions) == 0 || p.pos-positions[len(positions)-1] > posTol {
			positions = append(positions, p.pos)
			bySlice = append(bySlice, nil)
			ipps = append(ipps, p.r.meta().IPP)
		}
		k := len(positions) - 1
		bySlice[k] = append(bySlice[k], p.r)
	}
	ns := len(positions)
	// In-plane offsets must agree: the slices must stack along the normal.
	for k := 1; k < ns; k++ {
		d := ipps[k].Sub(ipps[0])
		if off := d.Sub(normal.Scale(d.Dot(normal))).Norm(); off > 0.5*math.Min(f0.Spacing[0], f0.Spacing[1]) {
			st.Problems = append(st.Problems, fmt.Sprintf("slice at %.2f mm is shifted %.2f mm within the image plane from the first slice (sheared stack); positions follow the first slice", positions[k], off))
			break
		}
	}
	spacing := 0.0
	if ns > 1 {
		spacing = (positions[ns-1] - positions[0]) / float64(ns-1)
		tol := math.Max(posTol, 0.01*spacing)
		for k := 1; k < ns; k++ {
			if d := positions[k] - positions[k-1]; math.Abs(d-spacing) > tol {
				st.Problems = append(st.Problems, fmt.Sprintf("uneven slice spacing: gap of %.3f mm between slices at %.2f and %.2f mm (mean %.3f mm); the mean spacing is used", d, positions[k-1], positions[k], spacing))
				break
			}
		}
	} else {
		spacing = f0.Thickness
		if !(spacing > 0) {
			spacing = 1
		}
	}
	st.Geometry = dosemap.Geometry{
		Cols: cols, Rows: rows, Slices: ns,
		Spacing: dosemap.Vec3{f0.Spacing[1], f0.Spacing[0], spacing},
		Origin:  ipps[0],
		Row:     f0.Row, Col: f0.Col, Normal: normal,
	}
	// Time points.
	useTPI := true
	for _, r := range frames {
		if r.meta().TemporalPos == 0 {
			useTPI = false
			break
		}
	}
	st.HasTimes = true
	for _, r := range frames {
		if !r.meta().Time.OK {
			st.HasTimes = false
			break
		}
	}
	clocks := make([]clockTime, len(frames))
	for n, r := range frames {
		clocks[n] = r.meta().Time
	}
	abs := unwrapMidnight(clocks)
	absOf := map[frameRef]float64{}
	st.Dated = st.HasTimes
	for n, r := range frames {
		absOf[r] = abs[n]
		if clocks[n].Day < 0 {
			st.Dated = false
		}
	}
	if useTPI {
		ids := map[int]bool{}
		for _, r := range frames {
			ids[r.meta().TemporalPos] = true
		}
		order := make([]int, 0, len(ids))
		for id := range ids {
			order = append(order, id)
		}
		sort.Ints(order)
		index := map[int]int{}
		for t, id := range order {
			index[id] = t
		}
		st.Grid = make([][]*frameRef, len(order))
		for t := range st.Grid {
			st.Grid[t] = make([]*frameRef, ns)
		}
		dup := 0
		for k, list := range bySlice {
			for _, r := range list {
				t := index[r.meta().TemporalPos]
				if st.Grid[t][k] != nil {
					if dup == 0 {
						st.Problems = append(st.Problems, fmt.Sprintf("duplicated slice: %s and %s both hold time point %d at %.2f mm; the first is used",
							frameName(*st.Grid[t][k]), frameName(r), r.meta().TemporalPos, positions[k]))
					}
					dup++
					continue
				}
				rr := r
				st.Grid[t][k] = &rr
			}
		}
	} else {
		nt := 0
		for _, list := range bySlice {
			if len(list) > nt {
				nt = len(list)
			}
		}
		// A time series repeats every slice position; frames repeating only
		// a few positions of a single-time stack are duplicated slices.
		repeated, named := 0, false
		for _, list := range bySlice {
			if len(list) > 1 {
				repeated++
			}
		}
		if nt > 1 && st.HasTimes && 2*repeated < ns {
			for k, list := range bySlice {
				if len(list) > 1 {
					st.Problems = append(st.Problems, fmt.Sprintf("duplicated slice position: %s and %s have the same ImagePositionPatient (slice at %.2f mm); the earliest acquired is used",
						frameName(list[0]), frameName(list[1]), positions[k]))
				}
			}
			nt, named = 1, true
		}
		if nt > 1 && !st.HasTimes {
			st.Problems = append(st.Problems, fmt.Sprintf("%d frames per slice position but no TemporalPositionIdentifier and no acquisition or content times to order them; treated as duplicated slices, the first of each is used", nt))
			nt = 1
		}
		st.Grid = make([][]*frameRef, nt)
		for t := range st.Grid {
			st.Grid[t] = make([]*frameRef, ns)
		}
		for k, list := range bySlice {
			sorted := append([]frameRef(nil), list...)
			sort.SliceStable(sorted, func(a, b int) bool { return absOf[sorted[a]] < absOf[sorted[b]] })
			for t := 0; t < nt && t < len(sorted); t++ {
				r := sorted[t]
				if t > 0 && absOf[r] == absOf[sorted[t-1]] {
					st.Problems = append(st.Problems, fmt.Sprintf("duplicated slice: %s and %s have the same position %.2f mm and time", frameName(sorted[t-1]), frameName(r), positions[k]))
				}
				st.Grid[t][k] = &r
			}
			if len(sorted) > nt && !named {
				st.Problems = append(st.Problems, fmt.Sprintf("duplicated slices at %.2f mm: %d extra frames ignored", positions[k], len(sorted)-nt))
			}
		}
	}
	// Missing frames and time of each time point (the earliest slice).
	st.Times = make([]float64, len(st.Grid))
	var missing []string
	for t, row := range st.Grid {
		st.Times[t] = math.Inf(1)
		for k, r := range row {
			if r == nil {
				st.Missing++
				if len(missing) < 5 {
					missing = append(missing, fmt.Sprintf("time point %d at %.2f mm", t+1, positions[k]))
				}
				continue
			}
			if a := absOf[*r]; a < st.Times[t] {
				st.Times[t] = a
			}
		}
		if math.IsInf(st.Times[t], 1) {
			st.Times[t] = math.NaN()
		}
	}
	if st.Missing > 0 {
		more := ""
		if st.Missing > len(missing) {
			more = fmt.Sprintf(" and %d more", st.Missing-len(missing))
		}
		st.Problems = append(st.Problems, fmt.Sprintf("missing frames: %d of %d×%d (%s%s); those voxels are marked not monitored",
			st.Missing, len(st.Grid), ns, strings.Join(missing, ", "), more))
	}
	if st.HasTimes {
		for t := 1; t < len(st.Times); t++ {
			if st.Times[t] < st.Times[t-1] {
				st.Problems = append(st.Problems, fmt.Sprintf("frame times go backwards at time point %d (%s after %s)", t+1, clockString(st.Times[t]), clockString(st.Times[t-1])))
				break
			}
		}
	}
	return st, nil
}

func frameName(r frameRef) string {
	if len(r.fi.Frames) > 1 {
		return fmt.Sprintf("%s frame %d", filepath.Base(r.fi.Path), r.n+1)
	}
	return filepath.Base(r.fi.Path)
}

func iopText(m *frameMeta) string {
	return fmt.Sprintf("%.3g\\%.3g\\%.3g\\%.3g\\%.3g\\%.3g", m.Row[0], m.Row[1], m.Row[2], m.Col[0], m.Col[1], m.Col[2])
}

// relTimes returns the times of st relative to its first time point, or
// nil when the frames carry no times (a single time point gives {0}).
func (st *stack) relTimes() []float64 {
	if len(st.Times) == 1 {
		return []float64{0}
	}
	if !st.HasTimes || len(st.Times) == 0 {
		return nil // unknown: the caller reports it
	}
	out := make([]float64, len(st.Times))
	for n, t := range st.Times {
		out[n] = t - st.Times[0]
	}
	return out
}
