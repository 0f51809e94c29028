package dicomio

import (
	"context"
	"strings"
	"testing"
)

// Orientations (ImageOrientationPatient, PS3.3 C.7.6.2.1.1): row and
// column direction cosines of coronal and sagittal images.
var (
	iopCoronal  = [6]float64{1, 0, 0, 0, 0, -1}
	iopSagittal = [6]float64{0, 1, 0, 0, 0, -1}
	iopAxial    = [6]float64{1, 0, 0, 0, 1, 0}
)

// planeSeries writes one single-slice thermometry plane of 8×8 pixels,
// 4 time points 3 s apart from start (seconds after 10:00), magnitude and
// phase images, as instances after first of series uid.
func planeSeries(t *testing.T, dir, uid, desc, forUID string, number int, iop [6]float64, start float64, first int) {
	mrSpec{Dir: dir, SeriesUID: uid, Desc: desc, FoR: forUID, Number: number,
		Cols: 8, Rows: 8, Slices: 1, Times: 4, Spacing: 2, SliceGap: 3,
		Origin: [3]float64{-7, -7, 7}, IOP: iop, Components: []string{"M", "P"},
		StartSec: 10*3600 + start, Date: "20260101", DT: 3, TPI: true, B0: 3, TE: 12.8, First: first,
		Value: func(c string, i, j, k, tt int) int {
			if c == "M" {
				return 2000
			}
			return phaseU16(i, j, k, tt)
		}}.write(t)
}

// TestPlanesAcquiredTogether checks how thermometry planes become
// sonications: the frames of one series in two orientations are two
// stacks of one sonication (not a refused series); series acquired at the
// same time (overlapping frame times, one frame of reference) are one
// sonication with several stacks; series acquired one after the other are
// sonications of their own; and overlapping series that cannot be grouped
// (the same plane twice, another frame of reference) stay apart with a
// problem that names both series.
func TestPlanesAcquiredTogether(t *testing.T) {
	type series struct {
		uid, desc, forUID string
		number            int
		iop               [6]float64
		start             float64
		first             int
	}
	cases := []struct {
		name        string
		series      []series
		sonications int
		stacks      []string // orientations of the first sonication's stacks
		problem     []string // words of a problem, "" none expected about planes
	}{
		{name: "one series, two orientations", series: []series{
			{"2.25.501", "planes", testFoR, 5, iopCoronal, 0, 0},
			{"2.25.501", "planes", testFoR, 5, iopSagittal, 0.5, 100},
		}, sonications: 1, stacks: []string{"coronal", "sagittal"}},
		{name: "one series per plane, same times", series: []series{
			{"2.25.511", "coronal plane", testFoR, 11, iopCoronal, 0, 0},
			{"2.25.512", "sagittal plane", testFoR, 12, iopSagittal, 0.5, 0},
		}, sonications: 1, stacks: []string{"coronal", "sagittal"}},
		{name: "one after the other", series: []series{
			{"2.25.521", "first", testFoR, 21, iopAxial, 0, 0},
			{"2.25.522", "second", testFoR, 22, iopCoronal, 60, 0},
		}, sonications: 2},
		{name: "same plane twice at the same time", series: []series{
			{"2.25.531", "plane A", testFoR, 31, iopCoronal, 0, 0},
			{"2.25.532", "plane B", testFoR, 32, iopCoronal, 0.5, 0},
		}, sonications: 2, problem: []string{`#31 "plane A"`, `#32 "plane B"`, "same plane"}},
		{name: "another frame of reference", series: []series{
			{"2.25.541", "plane A", testFoR, 41, iopCoronal, 0, 0},
			{"2.25.542", "plane B", "2.25.999", 42, iopSagittal, 0.5, 0},
		}, sonications: 2, problem: []string{`#42 "plane B"`, `#41 "plane A"`, "another frame of reference"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			for _, s := range tc.series {
				planeSeries(t, dir, s.uid, s.desc, s.forUID, s.number, s.iop, s.start, s.first)
			}
			c, inv, err := Load(context.Background(), dir, LoadOptions{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(c.Sonications) != tc.sonications || len(inv.Sonications) != tc.sonications {
				t.Fatalf("%d sonications (inventory %d), want %d; problems %q", len(c.Sonications), len(inv.Sonications), tc.sonications, inv.Problems)
			}
			for _, p := range inv.Problems {
				if strings.Contains(p, "mixed orientations") {
					t.Errorf("problem %q: planes of several orientations must be read as stacks", p)
				}
			}
			if tc.stacks != nil {
				so := c.Sonications[0]
				if got := 1 + len(so.Stacks); got != len(tc.stacks) {
					t.Fatalf("%d stacks, want %d", got, len(tc.stacks))
				}
				info := inv.Sonications[0].Stacks
				var got []string
				for _, st := range info {
					got = append(got, st.Orientation)
				}
				for _, want := range tc.stacks {
					if !strings.Contains(strings.Join(got, ","), want) {
						t.Errorf("stacks %v, want one %s", got, want)
					}
				}
				for _, st := range so.Stacks {
					if st.Number != so.Number || len(st.Phase) != 4 || len(st.Magnitude) != 4 {
						t.Errorf("further stack: number %d (want %d), %d phase and %d magnitude frames (want 4)", st.Number, so.Number, len(st.Phase), len(st.Magnitude))
					}
				}
			}
			if tc.problem != nil {
				found := false
				for _, p := range inv.Problems {
					all := true
					for _, w := range tc.problem {
						all = all && strings.Contains(p, w)
					}
					found = found || all
				}
				if !found {
					t.Errorf("no problem with %q; problems %q", tc.problem, inv.Problems)
				}
			}
			var b strings.Builder
			if err := inv.WriteText(&b); err != nil {
				t.Fatal(err)
			}
			if tc.stacks != nil && !strings.Contains(b.String(), "stack 2: ") {
				t.Errorf("inventory text does not list the stacks:\n%s", b.String())
			}
		})
	}
}
