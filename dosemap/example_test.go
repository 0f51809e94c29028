package dosemap_test

import (
	"fmt"
	"math"

	"dosecover/dosemap"
)

// One minute at 44 °C is two equivalent minutes at 43 °C (Sapareto & Dewey
// 1984).
func ExampleCEM43_Dose() {
	g := dosemap.NewAxialGeometry(1, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	ts := &dosemap.TemperatureSeries{Geometry: g, Times: []float64{0, 20, 40, 60},
		Frames: [][]float32{{44}, {44}, {44}, {44}}}
	d := dosemap.DefaultCEM43().Dose(ts)
	fmt.Printf("%.3f %s\n", d.Data[0], d.Unit)
	// Output: 2.000 CEM43
}

func ExampleCEM43_Rate() {
	m := dosemap.DefaultCEM43()
	for _, T := range []float64{42, 43, 44, 50} {
		fmt.Printf("%g °C: %g\n", T, m.Rate(T))
	}
	// Output:
	// 42 °C: 0.25
	// 43 °C: 1
	// 44 °C: 2
	// 50 °C: 128
}

func ExamplePRF_PhasePerDegree() {
	p := dosemap.PRF{Alpha: -0.01, B0: 3, TE: 12.8e-3, Sign: 1}
	fmt.Printf("%.4f rad/°C\n", p.PhasePerDegree())
	// Output: -0.1027 rad/°C
}

func ExamplePRF_WrapLimit() {
	for _, p := range []dosemap.PRF{{B0: 3, TE: 12.8e-3}, {B0: 1.5, TE: 20e-3}} {
		fmt.Printf("%.1f T, TE %.1f ms: %.1f °C\n", p.B0, p.TE*1e3, p.WrapLimit())
	}
	// Output:
	// 3.0 T, TE 12.8 ms: 30.6 °C
	// 1.5 T, TE 20.0 ms: 39.1 °C
}

func ExamplePRF_NoiseSigma() {
	p := dosemap.PRF{B0: 3, TE: 12.8e-3}
	fmt.Printf("%.3f °C\n", p.NoiseSigma(50))
	// Output: 0.275 °C
}

// Ten seconds at 55 °C with Henriques and Moritz's skin parameters.
func ExampleArrhenius_Dose() {
	g := dosemap.NewAxialGeometry(1, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	ts := &dosemap.TemperatureSeries{Geometry: g, Times: []float64{0, 10},
		Frames: [][]float32{{55}, {55}}}
	m := dosemap.DefaultArrhenius()
	fmt.Printf("%s: Ω = %.3f\n", m.Name(), m.Dose(ts).Data[0])
	// Output: Arrhenius (skin): Ω = 0.338
}

// A phase series with a steady rise: the first two frames are the baseline.
func ExampleThermometry() {
	g := dosemap.NewAxialGeometry(1, 1, 1, dosemap.Vec3{2, 2, 3}, dosemap.Vec3{})
	p := dosemap.PRF{Alpha: -0.01, B0: 3, TE: 12.8e-3, Sign: 1}
	s := &dosemap.Sonication{Number: 1, Geometry: g, B0: 3, TE: 12.8e-3, Times: []float64{0, 3, 6, 9}}
	for _, dT := range []float64{0, 0, 10, 40} {
		phi := math.Remainder(0.5+p.PhasePerDegree()*dT, 2*math.Pi) // as the scanner wraps it
		s.Phase = append(s.Phase, []float32{float32(phi)})
	}
	opt := dosemap.DefaultThermometryOptions()
	opt.Drift = dosemap.DriftNone
	ts, err := dosemap.Thermometry(s, opt)
	if err != nil {
		fmt.Println(err)
		return
	}
	for f, fr := range ts.Frames {
		fmt.Printf("t = %g s: %.2f °C\n", ts.Times[f], fr[0])
	}
	// Output:
	// t = 0 s: 37.00 °C
	// t = 3 s: 37.00 °C
	// t = 6 s: 47.00 °C
	// t = 9 s: 77.00 °C
}

func ExampleSumDose() {
	g := dosemap.NewAxialGeometry(2, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	nan := float32(math.NaN())
	a := &dosemap.DoseMap{Volume: dosemap.Volume{Geometry: g, Data: []float32{100, nan}}, Unit: "CEM43"}
	b := &dosemap.DoseMap{Volume: dosemap.Volume{Geometry: g, Data: []float32{200, 30}}, Unit: "CEM43"}
	sum, _ := dosemap.SumDose(a, b)
	fmt.Println(sum.Data, dosemap.LethalMask(sum, 240))
	// Output: [300 30] [true false]
}

func ExampleLethalProbability() {
	g := dosemap.NewAxialGeometry(2, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	ts := &dosemap.TemperatureSeries{Geometry: g, Times: []float64{0, 30, 60},
		Frames: [][]float32{{52, 55}, {52, 55}, {52, 55}}, Sigma: []float32{0.3, 0.3}}
	p, _ := dosemap.LethalProbability([]*dosemap.TemperatureSeries{ts}, dosemap.DefaultCEM43(), 240, nil, 200, 1)
	fmt.Println(p.Data)
	// Output: [1 1]
}

func ExampleGeometry_Point() {
	// PS3.3 C.7.6.2.1.1: IPP + column·column spacing·row direction + row·row spacing·column direction.
	g := dosemap.NewAxialGeometry(64, 64, 1, dosemap.Vec3{0.3125, 0.3125, 0.8}, dosemap.Vec3{-83.9063, -91.2, 6.6406})
	fmt.Printf("%.4f\n", g.Point(10, 20, 0))
	i, j, k := g.Voxel(dosemap.Vec3{-80.7813, -84.95, 6.6406})
	fmt.Printf("%.2f %.2f %.2f\n", i, j, k)
	// Output:
	// [-80.7813 -84.9500 6.6406]
	// 10.00 20.00 0.00
}

func ExampleResample() {
	src := dosemap.NewVolume(dosemap.NewAxialGeometry(3, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{}))
	copy(src.Data, []float32{0, 10, 20})
	dst := dosemap.NewAxialGeometry(4, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{0.5, 0, 0})
	fmt.Println(dosemap.Resample(src, dst).Data) // the last voxel lies outside: NaN
	// Output: [5 15 20 NaN]
}
