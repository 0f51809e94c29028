package review

import (
	"context"
	"fmt"
	"math"
	"testing"

	"dosecover/dosemap"
)

// typicalCase builds a session in memory: n sonications of ready dose maps
// on a cols×cols×6 grid of 1.25×1.25×3 mm, each a lethal ball of 4 mm
// radius at points spread over a target sphere of 25 mm diameter.
func typicalCase(cols, n int) *dosemap.Case {
	g := thermoGrid(cols, cols, 6)
	c := &dosemap.Case{Label: "benchmark phantom",
		Structures: []dosemap.Structure{sphereStructure("target", dosemap.Vec3{0.3, 0.2, 0}, 12.5, 1.5, 0, 64, dosemap.RoleTarget)}}
	for s := 0; s < n; s++ {
		a := 2 * math.Pi * float64(s) / float64(n)
		rad := 3 + 6*float64(s%3)
		ctr := dosemap.Vec3{rad * math.Cos(a), rad * math.Sin(a), float64(s%3-1) * 3}
		c.Sonications = append(c.Sonications, doseSonication(s+1, g, ballDose(ctr, 4, 1.5)))
	}
	return c
}

func BenchmarkPrepare(b *testing.B) {
	for _, cols := range []int{64, 128} {
		c := typicalCase(cols, 24)
		b.Run(fmt.Sprintf("%dx%dx6_24son", cols, cols), func(b *testing.B) {
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
		c := typicalCase(cols, 24)
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
			b.Run(fmt.Sprintf("%dx%dx6_24son/%s", cols, cols, ch.name), func(b *testing.B) {
				n := 0
				for b.Loop() {
					s := set
					ch.change(&s, n)
					n++
					if _, err := ses.Analyze(context.Background(), s, nil); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}
