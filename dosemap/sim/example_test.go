package sim_test

import (
	"fmt"
	"os"

	"dosecover/dosemap"
	"dosecover/dosemap/sim"
)

// A deterministic UID: the same name always gives the same UID.
func ExampleUID() {
	fmt.Println(sim.UID("example") == sim.UID("example"), len(sim.UID("example")) <= 64)
	// Output: true true
}

// Heat a gel phantom with one 10 s focal spot and report the hottest voxel.
func ExampleBioheat() {
	g := dosemap.NewAxialGeometry(41, 61, 41, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{-20, -30, -20})
	b, err := sim.NewBioheat(g, sim.GelPhantom, 37)
	if err != nil {
		panic(err)
	}
	q := make([]float64, g.Len())
	sim.FocalSpot{Center: dosemap.Vec3{}, Direction: dosemap.Vec3{0, -1, 0}, Power: 5.5,
		SigmaAxial: 8, SigmaLateral: 2.4}.Deposit(g, q)
	fmt.Printf("stable step %.2f s\n", b.StableStep())
	b.Advance(10, 0, q)
	peak := 0.0
	for _, t := range b.T {
		peak = max(peak, t)
	}
	fmt.Printf("after %.0f s: peak %.0f °C\n", b.Time, peak)
	// Output:
	// stable step 1.14 s
	// after 10 s: peak 53 °C
}

// Write a two-sonication cut of the demo scenario and look at its truth.
func ExampleWriteSession() {
	dir, err := os.MkdirTemp("", "dosecover-example-")
	if err != nil {
		panic(err)
	}
	defer os.RemoveAll(dir)
	s := sim.DemoSession()
	s.Sonications = s.Sonications[:2]
	s.Motion = nil
	truth, err := sim.WriteSession(dir, s)
	if err != nil {
		panic(err)
	}
	fmt.Println(truth.Files, "files,", len(truth.Sonications), "sonications,", truth.Sonications[0].Folder)
	// Output: 193 files, 2 sonications, sonication-01
}
