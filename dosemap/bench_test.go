package dosemap

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"dosecover/dosemap/testkit"
)

// cpuMeter reports a throughput both per wall-clock second and per CPU
// second of the benchmark's thread (the latter is robust to other load on
// the machine).
type cpuMeter struct {
	b     *testing.B
	start int64
	ok    bool
}

func startCPU(b *testing.B) *cpuMeter {
	runtime.LockOSThread()
	c, ok := testkit.ThreadCPU()
	b.ResetTimer()
	return &cpuMeter{b: b, start: int64(c), ok: ok}
}

// reportTime reports milliseconds per item, wall and CPU.
func (m *cpuMeter) reportTime(items float64, name string) {
	b := m.b
	c, ok := testkit.ThreadCPU()
	runtime.UnlockOSThread()
	b.ReportMetric(b.Elapsed().Seconds()*1e3/(items*float64(b.N)), name)
	if ok && m.ok && int64(c) > m.start {
		b.ReportMetric(float64(int64(c)-m.start)/1e6/(items*float64(b.N)), name+"-cpu")
	}
}

// report reports work/1e6 per second as name (wall) and name+"-cpu".
func (m *cpuMeter) report(work float64, name string) {
	b := m.b
	c, ok := testkit.ThreadCPU()
	runtime.UnlockOSThread()
	b.ReportMetric(work*float64(b.N)/b.Elapsed().Seconds()/1e6, name)
	if ok && m.ok && int64(c) > m.start {
		b.ReportMetric(work*float64(b.N)/(float64(int64(c)-m.start)/1e9)/1e6, name+"-cpu")
	}
}

// benchSeries returns a cols×cols×slices series of nf frames with a heated
// spot (up to 60 °C) on 37 °C plus noise, 3-s frames.
func benchSeries(cols, slices, nf int) *TemperatureSeries {
	g := NewAxialGeometry(cols, cols, slices, Vec3{1.5, 1.5, 3}, Vec3{})
	rng := rand.New(rand.NewPCG(1, 2))
	ts := &TemperatureSeries{Geometry: g, Times: uniformTimes(nf, 3)}
	c := float64(cols) / 2
	for f := 0; f < nf; f++ {
		fr := make([]float32, g.Len())
		a := math.Sin(math.Pi * float64(f) / float64(nf))
		for n := range fr {
			i, j, _ := g.IJK(n)
			r2 := (float64(i)-c)*(float64(i)-c) + (float64(j)-c)*(float64(j)-c)
			fr[n] = float32(37 + 23*a*math.Exp(-r2/50) + 0.3*rng.NormFloat64())
		}
		ts.Frames = append(ts.Frames, fr)
	}
	ts.Sigma = make([]float32, g.Len())
	for n := range ts.Sigma {
		ts.Sigma[n] = 0.3
	}
	return ts
}

func benchDose(b *testing.B, m DoseModel, cols, slices, nf int) {
	ts := benchSeries(cols, slices, nf)
	cpu := startCPU(b)
	for b.Loop() {
		m.Dose(ts)
	}
	cpu.report(float64(ts.Geometry.Len()*nf), "Mvoxel-frames/s")
}

// BenchmarkReadFrames is the floor for dose accumulation: summing every
// value of the same series once. Compare the dose benchmarks with it.
func BenchmarkReadFrames(b *testing.B) {
	ts := benchSeries(128, 6, 300)
	cpu := startCPU(b)
	var sink float32
	for b.Loop() {
		for _, fr := range ts.Frames {
			for _, v := range fr {
				sink += v
			}
		}
	}
	cpu.report(float64(ts.Geometry.Len()*300), "Mvoxel-frames/s")
	_ = sink
}

// BenchmarkCEM43 measures dose accumulation; target ≥ 100 M voxel-frames/s
// on one core at 128×128×6 × 300 frames.
func BenchmarkCEM43(b *testing.B) {
	for _, s := range []struct{ cols, slices, frames int }{{32, 2, 50}, {64, 6, 100}, {128, 6, 300}} {
		for _, rule := range []TimeRule{RuleTrapezoid, RuleRectangle} {
			b.Run(fmt.Sprintf("%dx%dx%d/%d/%v", s.cols, s.cols, s.slices, s.frames, rule), func(b *testing.B) {
				benchDose(b, CEM43{Rule: rule}, s.cols, s.slices, s.frames)
			})
		}
	}
}

func BenchmarkArrhenius(b *testing.B) {
	for _, s := range []struct{ cols, slices, frames int }{{64, 6, 100}, {128, 6, 300}} {
		b.Run(fmt.Sprintf("%dx%dx%d/%d", s.cols, s.cols, s.slices, s.frames), func(b *testing.B) {
			benchDose(b, DefaultArrhenius(), s.cols, s.slices, s.frames)
		})
	}
}

// BenchmarkThermometry measures phase-to-temperature conversion per frame
// (target under 1 ms for one 128×128×6 frame), with and without drift
// correction ("default" is DefaultThermometryOptions: polynomial of order 1,
// automatic reference; "polynomial" is order 2).
func BenchmarkThermometry(b *testing.B) {
	for _, s := range []struct{ cols, frames int }{{64, 20}, {128, 20}, {128, 100}} {
		p := newPhantom(s.cols, s.frames)
		p.g.Slices = 6
		p.rise = hotSpot(20, 2, 8)
		p.snr = 40
		son := p.sonication(true)
		for _, d := range []DriftMethod{DriftNone, DriftMean, DriftPolynomial, -1} {
			name := d.String()
			if d < 0 {
				name = "default"
			}
			b.Run(fmt.Sprintf("%dx%dx6/%d/%s", s.cols, s.cols, s.frames, name), func(b *testing.B) {
				opt := DefaultThermometryOptions()
				if d >= 0 {
					opt.Drift, opt.DriftOrder = d, 2
				}
				cpu := startCPU(b)
				for b.Loop() {
					if _, err := Thermometry(son, opt); err != nil {
						b.Fatal(err)
					}
				}
				cpu.reportTime(float64(s.frames), "ms/frame")
			})
		}
	}
}

// BenchmarkMonteCarlo measures one trial over a 2000-voxel mask of a
// 128×128×6 series of 300 frames.
func BenchmarkMonteCarlo(b *testing.B) {
	ts := benchSeries(128, 6, 300)
	mask := make([]bool, ts.Geometry.Len())
	for n := 0; n < 2000; n++ {
		mask[n*37%len(mask)] = true
	}
	// MonteCarlo computes on GOMAXPROCS goroutines: the CPU figure is that
	// of the whole process.
	c0, ok := testkit.ProcessCPU()
	n := 0
	for b.Loop() {
		if err := MonteCarlo([]*TemperatureSeries{ts}, DefaultCEM43(), mask, 10, 1, func(int, []float32) {}); err != nil {
			b.Fatal(err)
		}
		n++
	}
	const work = 10 * 2000 * 300
	b.ReportMetric(work*float64(n)/b.Elapsed().Seconds()/1e6, "Mvoxel-frames/s")
	if c1, ok1 := testkit.ProcessCPU(); ok && ok1 && c1 > c0 {
		b.ReportMetric(work*float64(n)/(c1-c0).Seconds()/1e6, "Mvoxel-frames/s-cpu")
	}
}

func BenchmarkResample(b *testing.B) {
	for _, n := range []int{64, 128} {
		src := NewVolume(NewAxialGeometry(n, n, 6, Vec3{1.5, 1.5, 3}, Vec3{}))
		linearField(src, Vec3{1, 2, 3}, 0)
		r := rotation(Vec3{0, 0, 1}, 0.3)
		dst := Geometry{Cols: n, Rows: n, Slices: 6, Spacing: Vec3{1.2, 1.2, 3}, Origin: Vec3{5, 5, 0},
			Row: r.apply(Vec3{1, 0, 0}), Col: r.apply(Vec3{0, 1, 0}), Normal: Vec3{0, 0, 1}}
		b.Run(fmt.Sprintf("%dx%dx6", n, n), func(b *testing.B) {
			for b.Loop() {
				Resample(src, dst)
			}
		})
	}
}
