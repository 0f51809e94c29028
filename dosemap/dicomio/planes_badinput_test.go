package dicomio

import (
	"context"
	"strings"
	"testing"

	"github.com/suyashkumar/dicom"
)

// problemWith returns the first problem holding every one of words, or "".
func problemWith(inv *Inventory, words ...string) string {
	for _, p := range inv.Problems {
		all := true
		for _, w := range words {
			all = all && strings.Contains(p, w)
		}
		if all {
			return p
		}
	}
	return ""
}

// Planes that cannot be used as written are named, never merged or
// dropped silently. Positions in different frames of reference cannot be
// related (PS3.3 C.7.4.1.1.1, Frame of Reference UID): a plane of a
// multi-plane series in another frame of reference is refused, its files
// listed as skipped with both UIDs and the series named; a stack grouped
// from a series without a frame of reference is named.
func TestPlanesInAnotherFrameOfReference(t *testing.T) {
	t.Run("one plane of a series", func(t *testing.T) {
		dir := t.TempDir()
		planeSeries(t, dir, "2.25.551", "three planes", testFoR, 5, iopCoronal, 0, 0)
		planeSeries(t, dir, "2.25.551", "three planes", testFoR, 5, iopAxial, 0.2, 100)
		planeSeries(t, dir, "2.25.551", "three planes", "2.25.998", 5, iopSagittal, 0.4, 200)
		c, inv, err := Load(context.Background(), dir, LoadOptions{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if len(c.Sonications) != 1 || len(c.Sonications[0].Stacks) != 1 {
			t.Fatalf("%d sonications, want 1 with 2 stacks; problems %q", len(c.Sonications), inv.Problems)
		}
		for _, st := range stacksOfSonication(c.Sonications[0]) {
			if orientationName(st.Geometry) == "sagittal" {
				t.Errorf("the sagittal plane, in another frame of reference, was merged into the sonication")
			}
		}
		if problemWith(inv, `series #5 "three planes"`, "8 of its 24 files", "another frame of reference", testFoR) == "" {
			t.Errorf("no problem names the series and its files in another frame of reference: %q", inv.Problems)
		}
		skipped := 0
		for _, s := range inv.Skipped {
			if strings.Contains(s.Reason, "FrameOfReferenceUID (0020,0052) 2.25.998 differs from the "+testFoR) {
				skipped++
			}
		}
		if skipped != 8 {
			t.Errorf("%d files skipped for their frame of reference, want the 8 of the sagittal plane; skipped %v", skipped, inv.Skipped)
		}
	})
	t.Run("a series without one grouped with one that has it", func(t *testing.T) {
		dir := t.TempDir()
		planeSeries(t, dir, "2.25.561", "coronal plane", testFoR, 11, iopCoronal, 0, 0)
		planeSeries(t, dir, "2.25.562", "sagittal plane", "", 12, iopSagittal, 0.5, 0)
		c, inv, err := Load(context.Background(), dir, LoadOptions{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if len(c.Sonications) != 1 {
			t.Fatalf("%d sonications, want 1; problems %q", len(c.Sonications), inv.Problems)
		}
		if problemWith(inv, `a stack of sonication 1 (series #12 "sagittal plane")`, "no FrameOfReferenceUID") == "" {
			t.Errorf("the stack without a frame of reference is not named: %q", inv.Problems)
		}
	})
}

// Temperature or dose maps acquired at the same time as thermometry (or
// as each other) cannot be grouped into one sonication: they are read as
// sonications of their own and named, since they may be one sonication
// counted twice; maps acquired later are not named.
func TestMapsAcquiredWithThermometry(t *testing.T) {
	for _, tc := range []struct {
		name  string
		start float64 // seconds after 10:00 of the temperature maps
		named bool
	}{
		{"at the same time", 3, true},
		{"a minute later", 60, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			planeSeries(t, dir, "2.25.571", "coronal plane", testFoR, 21, iopCoronal, 0, 0)
			mrSpec{Dir: dir, SeriesUID: "2.25.572", Desc: "temperature plane", FoR: testFoR, Number: 22,
				Cols: 8, Rows: 8, Slices: 1, Times: 3, Spacing: 2, SliceGap: 3,
				Origin: [3]float64{-7, -7, 7}, IOP: iopSagittal, StartSec: 10*3600 + tc.start, Date: "20260101", DT: 3, TPI: true,
				RWV:   []*dicom.Element{rwvElement(t, 0.1, 0, "Cel", "TEMP")},
				Value: func(_ string, i, _, _, _ int) int { return 370 + i }}.write(t)
			c, inv, err := Load(context.Background(), dir, LoadOptions{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(c.Sonications) != 2 {
				t.Fatalf("%d sonications, want 2; problems %q", len(c.Sonications), inv.Problems)
			}
			p := problemWith(inv, `#22 "temperature plane"`, `#21 "coronal plane"`, "cannot be grouped")
			if tc.named && p == "" {
				t.Errorf("temperature maps acquired with the thermometry are not named: %q", inv.Problems)
			}
			if !tc.named && p != "" {
				t.Errorf("maps acquired later named as acquired together: %q", p)
			}
		})
	}
}
