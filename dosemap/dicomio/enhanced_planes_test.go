package dicomio

import (
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/testkit"
)

// writeEnhancedPlanes writes testdata/enhanced_planes.py's objects of the
// given layouts into dir with pydicom (Debian's python3-pydicom), an
// independent DICOM writer, as dir/LAYOUT.dcm.
func writeEnhancedPlanes(t *testing.T, dir string, layouts ...string) {
	t.Helper()
	py := testkit.Python(t)
	script, err := filepath.Abs(filepath.Join("testdata", "enhanced_planes.py"))
	if err != nil {
		t.Fatal(err)
	}
	if b, err := exec.Command(py, append([]string{script, dir}, layouts...)...).CombinedOutput(); err != nil {
		t.Fatalf("pydicom writer: %v\n%s", err, b)
	}
}

// The objects the tests read are valid Enhanced MR Image objects: dciodvfy
// (Debian's dicom3tools, which checks an object against the IOD of PS3.3
// A.36.2 and the Frame Content and Multi-frame Dimension rules of
// C.7.6.16.2.2 and C.7.6.17) reports no error and no warning for any of
// them, the layouts whose StackIDs disagree with their planes included:
// those are valid objects carrying values a reader must question.
func TestEnhancedPlanesValidObjects(t *testing.T) {
	tool, err := exec.LookPath("dciodvfy")
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatal("dciodvfy not found (install dicom3tools)")
		}
		t.Skip("dciodvfy not found (install dicom3tools); skipping")
	}
	dir := t.TempDir()
	layouts := []string{"planes", "slabs", "mixed-id", "bad-order", "no-id", "some-id", "id-per-time"}
	writeEnhancedPlanes(t, dir, layouts...)
	for _, layout := range layouts {
		out, _ := exec.Command(tool, filepath.Join(dir, layout+".dcm")).CombinedOutput()
		lines := strings.Split(strings.TrimSpace(string(out)), "\n")
		if lines[0] != "EnhancedMRImage" {
			t.Errorf("%s: dciodvfy recognised %q, want EnhancedMRImage", layout, lines[0])
		}
		for _, l := range lines[1:] {
			if strings.HasPrefix(l, "Error") || strings.HasPrefix(l, "Warning") {
				t.Errorf("%s: dciodvfy: %s", layout, l)
			}
		}
	}
}

// TestEnhancedStacksByStackID reads enhanced MR thermometry written by
// pydicom, magnitude and phase frames of two stacks in one file, and
// checks that the frames are split into stacks by their StackID
// (0020,9056), that InStackPositionNumber (0020,9057) is checked against
// the slice positions, and that StackIDs that disagree with the planes are
// named. The stored values follow the formula of enhanced_planes.py, so
// each frame's place (stack, slice, time point) is checked by its pixels:
// phase = (stored − 32768)·π/32768 rad (unsigned 16 bits, no real-world
// value mapping: the linear map of the package doc), magnitude = stored
// (RescaleSlope 1, RescaleIntercept 0). Exact up to float32 rounding
// (tolerance 1e-6).
func TestEnhancedStacksByStackID(t *testing.T) {
	type stackWant struct {
		orientation, id string
		slices          int
		centre          dosemap.Vec3
		s               int // stack number of the writer's formula
	}
	cases := []struct {
		layout  string
		stacks  []stackWant
		problem []string // words of one problem; nil: no problem may name StackID
		allow   string   // a problem about the stacks this layout is expected to have
	}{
		{layout: "planes", stacks: []stackWant{
			{"coronal", "1", 1, dosemap.Vec3{0, 0, 0}, 1},
			{"sagittal", "2", 1, dosemap.Vec3{0, 0, 0}, 2},
		}},
		// Parallel stacks of one orientation: only the StackID keeps them
		// apart (by orientation they would be one stack of uneven spacing).
		{layout: "slabs", stacks: []stackWant{
			{"axial", "1", 2, dosemap.Vec3{0, 0, -18.5}, 1},
			{"axial", "2", 2, dosemap.Vec3{0, 0, 11.5}, 2},
		}},
		// Without StackIDs (or with StackIDs that disagree with the planes)
		// the stacks are found by orientation, sagittal first (ties in
		// order of the normal's components).
		{layout: "no-id", stacks: []stackWant{
			{"sagittal", "", 1, dosemap.Vec3{0, 0, 0}, 2},
			{"coronal", "", 1, dosemap.Vec3{0, 0, 0}, 1},
		}},
		{layout: "mixed-id", stacks: []stackWant{
			{"sagittal", "", 1, dosemap.Vec3{0, 0, 0}, 2},
			{"coronal", "", 1, dosemap.Vec3{0, 0, 0}, 1},
		}, problem: []string{`series #7 "thermometry planes mixed-id"`, `StackID (0020,9056) "1" holds frames in two orientations`, "mixed-id.dcm frame", "split by orientation"}},
		{layout: "bad-order", stacks: []stackWant{
			{"axial", "1", 2, dosemap.Vec3{0, 0, -18.5}, 1},
			{"axial", "2", 2, dosemap.Vec3{0, 0, 11.5}, 2},
		}, problem: []string{`series #7 "thermometry planes bad-order"`, `StackID (0020,9056) "2"`, "InStackPositionNumber (0020,9057) 1", "bad-order.dcm frame", "ordered by position"}},
		{layout: "some-id", stacks: []stackWant{
			{"sagittal", "", 1, dosemap.Vec3{0, 0, 0}, 2},
			{"coronal", "", 1, dosemap.Vec3{0, 0, 0}, 1},
		}, problem: []string{`series #7 "thermometry planes some-id"`, "6 of 8 frames carry a StackID (0020,9056) and 2 do not", "some-id.dcm frame", "split by ImageOrientationPatient"}},
		// Every StackID on the planes of the others: split by orientation,
		// one axial stack of four slices (of uneven spacing, named); its
		// pixels are not checked against the two-stack formula.
		{layout: "id-per-time", stacks: []stackWant{
			{"axial", "", 4, dosemap.Vec3{0, 0, -3.5}, 0},
		}, problem: []string{`series #7 "thermometry planes id-per-time"`, `StackIDs (0020,9056) "1" and "2" both hold the plane at -20.00 mm along the normal`, "split by orientation"},
			allow: "uneven slice spacing"},
	}
	written := t.TempDir()
	var layouts []string
	for _, tc := range cases {
		layouts = append(layouts, tc.layout)
	}
	writeEnhancedPlanes(t, written, layouts...)
	for _, tc := range cases {
		t.Run(tc.layout, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "case")
			if err := os.Mkdir(dir, 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.Rename(filepath.Join(written, tc.layout+".dcm"), filepath.Join(dir, tc.layout+".dcm")); err != nil {
				t.Fatal(err)
			}
			c, inv, err := Load(t.Context(), dir, LoadOptions{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(c.Sonications) != 1 || len(inv.Sonications) != 1 {
				t.Fatalf("%d sonications, want 1; problems %q", len(c.Sonications), inv.Problems)
			}
			if k := inv.Sonications[0].Kind; k != "phase+magnitude" {
				t.Errorf("kind %q, want phase+magnitude", k)
			}
			so := c.Sonications[0]
			stacks := stacksOfSonication(so)
			info := inv.Sonications[0].Stacks
			if len(info) == 0 && len(stacks) == 1 {
				// A sonication of one stack lists none: its own figures.
				g := so.Geometry
				info = []StackInfo{{Orientation: orientationName(g), Slices: g.Slices, Frames: len(so.Phase),
					Center: g.Point(float64(g.Cols-1)/2, float64(g.Rows-1)/2, float64(g.Slices-1)/2)}}
			}
			if len(stacks) != len(tc.stacks) || len(info) != len(tc.stacks) {
				t.Fatalf("%d stacks (inventory %d), want %d; problems %q", len(stacks), len(info), len(tc.stacks), inv.Problems)
			}
			for n, want := range tc.stacks {
				st, in := stacks[n], info[n]
				if in.Orientation != want.orientation || in.StackID != want.id || in.Slices != want.slices || in.Frames != 4 {
					t.Errorf("stack %d: %s, StackID %q, %d slices, %d frames; want %s, %q, %d, 4", n+1, in.Orientation, in.StackID, in.Slices, in.Frames, want.orientation, want.id, want.slices)
				}
				if in.Center.Sub(want.centre).Norm() > 1e-9 {
					t.Errorf("stack %d: centre %v mm, want %v", n+1, in.Center, want.centre)
				}
				if len(st.Phase) != 4 || len(st.Magnitude) != 4 {
					t.Fatalf("stack %d: %d phase and %d magnitude frames, want 4 and 4", n+1, len(st.Phase), len(st.Magnitude))
				}
				g := st.Geometry
				if want.s == 0 {
					continue
				}
				if g.Slices > 1 && math.Abs(g.Spacing[2]-3) > 1e-9 {
					t.Errorf("stack %d: slice spacing %g mm, want 3", n+1, g.Spacing[2])
				}
				for tt := 0; tt < 4; tt++ {
					// Frames 3 s apart (FrameAcquisitionDateTime), times
					// relative to each stack's first.
					if math.Abs(st.Times[tt]-3*float64(tt)) > 1e-6 {
						t.Errorf("stack %d: time point %d at %g s, want %g", n+1, tt+1, st.Times[tt], 3*float64(tt))
					}
					for k := 0; k < g.Slices; k++ {
						for _, ij := range [][2]int{{0, 0}, {1, 2}, {7, 5}} {
							stored := 1000*want.s + 100*tt + 10*k + ij[0] + ij[1]
							ph := float64(stored) * math.Pi / 32768
							mag := float64(2000 + stored)
							v := g.Index(ij[0], ij[1], k)
							if got := float64(st.Phase[tt][v]); math.Abs(got-ph) > 1e-6 {
								t.Errorf("stack %d t%d k%d (%d,%d): phase %g rad, want %g", n+1, tt, k, ij[0], ij[1], got, ph)
							}
							if got := float64(st.Magnitude[tt][v]); math.Abs(got-mag) > 1e-6 {
								t.Errorf("stack %d t%d k%d (%d,%d): magnitude %g, want %g", n+1, tt, k, ij[0], ij[1], got, mag)
							}
						}
					}
				}
			}
			for _, p := range inv.Problems {
				if tc.allow != "" && strings.Contains(p, tc.allow) {
					continue
				}
				if strings.Contains(p, "uneven") || strings.Contains(p, "mixed orientations") || strings.Contains(p, "duplicated") {
					t.Errorf("problem %q: the stacks were not split", p)
				}
				if tc.problem == nil && (strings.Contains(p, "StackID") || strings.Contains(p, "InStackPosition")) {
					t.Errorf("unexpected problem %q", p)
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
			// Read again with the frames left in the file (decoded when
			// needed): the same frames, bit for bit.
			cd, _, err := Load(t.Context(), dir, LoadOptions{Deferred: true}, nil)
			if err != nil {
				t.Fatal(err)
			}
			for n, st := range stacksOfSonication(cd.Sonications[0]) {
				if st.Phase != nil || st.Source == nil {
					t.Fatalf("stack %d: frames read at load time, want them deferred", n+1)
				}
				r, _, done, err := st.Resident(t.Context())
				if err != nil {
					t.Fatal(err)
				}
				for tt := range r.Phase {
					if !slices.Equal(r.Phase[tt], stacks[n].Phase[tt]) || !slices.Equal(r.Magnitude[tt], stacks[n].Magnitude[tt]) {
						t.Errorf("stack %d, time point %d: deferred frames differ from frames read at load", n+1, tt+1)
					}
				}
				done()
			}
			var b strings.Builder
			if err := inv.WriteText(&b); err != nil {
				t.Fatal(err)
			}
			for n, want := range tc.stacks {
				if len(tc.stacks) == 1 {
					break
				}
				line := "stack " + string(rune('1'+n)) + ": " + want.orientation
				if !strings.Contains(b.String(), line) {
					t.Errorf("inventory text lacks %q:\n%s", line, b.String())
				}
				if want.id != "" && !strings.Contains(b.String(), `StackID "`+want.id+`"`) {
					t.Errorf("inventory text lacks StackID %q:\n%s", want.id, b.String())
				}
			}
		})
	}
}

// stacksOfSonication returns so and its further stacks.
func stacksOfSonication(so *dosemap.Sonication) []*dosemap.Sonication {
	return append([]*dosemap.Sonication{so}, so.Stacks...)
}
