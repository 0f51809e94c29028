package review

import (
	"context"
	"fmt"
	"math"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/testkit"
)

// typicalCase builds a session in memory: n sonications on a cols×cols×6
// grid of 1.25×1.25×3 mm, each a lethal ball of 4 mm radius at points
// spread over a target sphere of 25 mm diameter. With frames > 0 each
// sonication is phase and magnitude thermometry of that many frames of
// 2 s (a Gaussian hot spot peaking at 57 °C, SNR 40), else a ready dose
// map.
func typicalCase(cols, n, frames int) *dosemap.Case {
	g := thermoGrid(cols, cols, 6)
	c := &dosemap.Case{Label: "benchmark phantom",
		Structures: []dosemap.Structure{sphereStructure("target", dosemap.Vec3{0.3, 0.2, 0}, 12.5, 1.5, 0, 64, dosemap.RoleTarget)}}
	for s := 0; s < n; s++ {
		a := 2 * math.Pi * float64(s) / float64(n)
		rad := 3 + 6*float64(s%3)
		ctr := dosemap.Vec3{rad * math.Cos(a), rad * math.Sin(a), float64(s%3-1) * 3}
		if frames > 0 {
			hot := func(p dosemap.Vec3) float64 { return 37 + 20*math.Exp(-p.Sub(ctr).Dot(p.Sub(ctr))/(2*16)) }
			c.Sonications = append(c.Sonications, heatedSonication(s+1, g, frames, 2, hot, 40, uint64(s)))
		} else {
			c.Sonications = append(c.Sonications, doseSonication(s+1, g, ballDose(ctr, 4, 1.5)))
		}
	}
	return c
}

func BenchmarkPrepare(b *testing.B) {
	for _, cols := range []int{64, 128} {
		c := typicalCase(cols, 24, 14)
		b.Run(fmt.Sprintf("%dx%dx6_24son_14frames", cols, cols), func(b *testing.B) {
			for b.Loop() {
				if _, err := Prepare(context.Background(), c, DefaultSettings(), nil); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkReanalyze measures Session.Analyze after a change of settings
// (target: under 100 ms for the 128×128×6, 24-sonication session).
func BenchmarkReanalyze(b *testing.B) {
	for _, cols := range []int{64, 128, 256} {
		frames := 14
		if cols > 128 {
			frames = 0 // ready dose maps: keeps the benchmark's set-up small
		}
		c := typicalCase(cols, 24, frames)
		set := DefaultSettings()
		set.Trials = 0
		ses, err := Prepare(context.Background(), c, set, nil)
		if err != nil {
			b.Fatal(err)
		}
		for _, ch := range []struct {
			name   string
			change func(s *Settings, n int)
		}{
			{"threshold", func(s *Settings, n int) { s.Threshold = []float64{240, 100}[n%2] }},
			{"margin", func(s *Settings, n int) { s.MarginMM = []float64{3, 5}[n%2] }},
			{"excluded", func(s *Settings, n int) { s.Excluded = [][]int{nil, {5}}[n%2] }},
		} {
			if frames == 0 {
				ch.name += "_dosemaps"
			}
			b.Run(fmt.Sprintf("%dx%dx6_24son/%s", cols, cols, ch.name), func(b *testing.B) {
				n := 0
				c0 := testkit.CPUTime()
				for b.Loop() {
					s := set
					ch.change(&s, n)
					n++
					if _, err := ses.Analyze(context.Background(), s, nil); err != nil {
						b.Fatal(err)
					}
				}
				reportCPU(b, c0, n)
			})
		}
	}
}

// BenchmarkReanalyzeMonteCarlo: threshold change with 50 Monte Carlo
// trials; the trials are cached, so only their thresholding is timed
// after the first.
func BenchmarkReanalyzeMonteCarlo(b *testing.B) {
	c := typicalCase(128, 24, 14)
	set := DefaultSettings()
	ses, err := Prepare(context.Background(), c, set, nil)
	if err != nil {
		b.Fatal(err)
	}
	if _, err := ses.Analyze(context.Background(), set, nil); err != nil {
		b.Fatal(err)
	}
	b.Run("128x128x6_24son_14frames/threshold", func(b *testing.B) {
		n := 0
		c0 := testkit.CPUTime()
		for b.Loop() {
			s := set
			s.Threshold = []float64{240, 100}[n%2]
			n++
			if _, err := ses.Analyze(context.Background(), s, nil); err != nil {
				b.Fatal(err)
			}
		}
		reportCPU(b, c0, n)
	})
	b.Run("128x128x6_24son_14frames/first_run_50_trials", func(b *testing.B) {
		n := 0
		c0 := testkit.CPUTime()
		defer func() { reportCPU(b, c0, n) }()
		for b.Loop() {
			s := set
			s.Seed = uint64(100 + n)
			n++
			if _, err := ses.Analyze(context.Background(), s, nil); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// reportCPU adds the process CPU time per operation since c0 (all
// goroutines, garbage collection included) as "cpu-ms/op": on a shared
// machine wall time also counts other people's work.
func reportCPU(b *testing.B, c0 time.Duration, n int) {
	if d := testkit.CPUTime() - c0; d > 0 && n > 0 {
		b.ReportMetric(float64(d)/1e6/float64(n), "cpu-ms/op")
	}
}
