package review_test

import (
	"context"
	"fmt"
	"math"
	"strings"

	"dosecover/dosemap"
	"dosecover/review"
)

// ballCase is a phantom: a cubic target 10 mm wide and one sonication whose
// dose falls exponentially (1.5 mm scale) from (2, 0, 0), 240 CEM43 at 4 mm.
func ballCase() *dosemap.Case {
	g := dosemap.NewAxialGeometry(32, 32, 8, dosemap.Vec3{1.25, 1.25, 3}, dosemap.Vec3{-19.375, -19.375, -10.5})
	dose := make([]float32, g.Len())
	for n := range dose {
		i, j, k := g.IJK(n)
		r := g.Point(float64(i), float64(j), float64(k)).Sub(dosemap.Vec3{2, 0, 0}).Norm()
		dose[n] = float32(240 * math.Exp((4-r)/1.5))
	}
	var target dosemap.Structure
	target.Name, target.Role = "target", dosemap.RoleTarget
	for z := -4.5; z <= 4.5; z += 1.5 {
		target.Contours = append(target.Contours, dosemap.Contour{Points: []dosemap.Vec3{{-5, -5, z}, {5, -5, z}, {5, 5, z}, {-5, 5, z}}})
	}
	return &dosemap.Case{Label: "phantom",
		Sonications: []*dosemap.Sonication{{Number: 1, Geometry: g, Dose: dose}},
		Structures:  []dosemap.Structure{target}}
}

func ExampleAnalyze() {
	set := review.DefaultSettings()
	r, err := review.Analyze(context.Background(), ballCase(), set, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("target %.2f mL, monitored %.0f %%, covered %.0f %% at %g CEM43\n",
		r.TargetVolumeML, 100*r.MonitoredFraction, 100*(*r.CoveredFraction), r.Threshold)
	fmt.Printf("%d hole(s); largest %.0f mm³, touches surface: %v\n", len(r.Holes), r.Holes[0].VolumeMM3, r.Holes[0].TouchesSurface)
	// Output:
	// target 1.05 mL, monitored 100 %, covered 24 % at 240 CEM43
	// 1 hole(s); largest 800 mm³, touches surface: true
}

func ExampleSession_Analyze() {
	ctx := context.Background()
	set := review.DefaultSettings()
	ses, err := review.Prepare(ctx, ballCase(), set, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, thr := range []float64{240, 2000} {
		set.Threshold = thr
		r, _ := ses.Analyze(ctx, set, nil)
		fmt.Printf("%g CEM43: covered %.0f %%\n", thr, 100*(*r.CoveredFraction))
	}
	// Output:
	// 240 CEM43: covered 24 %
	// 2000 CEM43: covered 0 %
}

func ExampleDistance() {
	// Distance from the single voxel (0,0,0) on 1×1×3 mm voxels.
	g := dosemap.NewAxialGeometry(3, 1, 2, dosemap.Vec3{1, 1, 3}, dosemap.Vec3{})
	mask := make([]bool, g.Len())
	mask[0] = true
	d := review.Distance(g, mask)
	fmt.Printf("%.3f %.3f\n", d[g.Index(2, 0, 0)], d[g.Index(2, 0, 1)])
	// Output: 2.000 3.606
}

func ExampleComponents() {
	g := dosemap.NewAxialGeometry(3, 3, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	mask := []bool{
		true, false, false,
		false, true, false,
		false, false, false,
	}
	_, n26 := review.Components(g, mask, review.Connect26)
	_, n6 := review.Components(g, mask, review.Connect6)
	fmt.Println(n26, n6)
	// Output: 1 2
}

func ExampleOccupancy() {
	// A 4×4 mm square drawn on one plane, standing for a 2 mm slab.
	s := dosemap.Structure{Name: "square", Contours: []dosemap.Contour{{Points: []dosemap.Vec3{{0, 0, 0}, {4, 0, 0}, {4, 4, 0}, {0, 4, 0}}}}}
	g := dosemap.NewAxialGeometry(8, 8, 1, dosemap.Vec3{1, 1, 2}, dosemap.Vec3{-1.5, -1.5, 0})
	occ, _ := review.Occupancy(&s, g, 2)
	var v float64
	for _, o := range occ {
		v += float64(o)
	}
	fmt.Printf("%.1f mm³\n", v*g.VoxelVolume())
	// Output: 32.0 mm³
}

func ExampleReadContours() {
	const file = `{"format": "dosecover-contours", "version": 1,
	 "structures": [{"name": "target", "role": "target",
	   "contours": [[[0, 0, 0], [10, 0, 0], [10, 10, 0], [0, 10, 0]]]}]}`
	ss, _, err := review.ReadContours(strings.NewReader(file), "example.json")
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(ss[0].Name, ss[0].Role, len(ss[0].Contours[0].Points), math.Abs(ss[0].Contours[0].Points[1][0]))
	// Output: target target 4 10
}
