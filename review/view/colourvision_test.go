package view

import (
	"image/color"
	"math"
	"testing"
)

// Colour vision deficiency simulation of Machado, Oliveira & Fernandes,
// "A physiologically-based model for simulation of color vision
// deficiency", IEEE TVCG 15(6):1291–1298, 2009: severity-1.0 matrices,
// applied to linear sRGB (from memory of the paper's table; the same
// values are listed in testdata/check-values.md).
var (
	machadoProtan = [3][3]float64{
		{0.152286, 1.052583, -0.204868},
		{0.114503, 0.786281, 0.099216},
		{-0.003882, -0.048116, 1.051998},
	}
	machadoDeutan = [3][3]float64{
		{0.367322, 0.860646, -0.227968},
		{0.280085, 0.672501, 0.047413},
		{-0.011820, 0.042940, 0.968881},
	}
	normalVision = [3][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}}
)

// linearise is the sRGB transfer function inverted (IEC 61966-2-1).
func linearise(c uint8) float64 {
	x := float64(c) / 255
	if x <= 0.04045 {
		return x / 12.92
	}
	return math.Pow((x+0.055)/1.055, 2.4)
}

// simulate applies m to c's linear RGB, clipped to 0..1.
func simulate(m [3][3]float64, c color.RGBA) [3]float64 {
	in := [3]float64{linearise(c.R), linearise(c.G), linearise(c.B)}
	var out [3]float64
	for i := range out {
		for j := range in {
			out[i] += m[i][j] * in[j]
		}
		out[i] = math.Max(0, math.Min(1, out[i]))
	}
	return out
}

// lab converts linear sRGB to CIELAB (D65 white; sRGB-to-XYZ matrix of
// IEC 61966-2-1, CIE 1976 L*a*b* formulas).
func lab(rgb [3]float64) [3]float64 {
	r, g, b := rgb[0], rgb[1], rgb[2]
	x := (0.4124*r + 0.3576*g + 0.1805*b) / 0.95047
	y := 0.2126*r + 0.7152*g + 0.0722*b
	z := (0.0193*r + 0.1192*g + 0.9505*b) / 1.08883
	f := func(t float64) float64 {
		if t > 216.0/24389 {
			return math.Cbrt(t)
		}
		return t*24389/27/116 + 16.0/116
	}
	return [3]float64{116*f(y) - 16, 500 * (f(x) - f(y)), 200 * (f(y) - f(z))}
}

// deltaE is the CIE 1976 colour difference of a and b seen through m.
func deltaE(m [3][3]float64, a, b color.RGBA) float64 {
	p, q := lab(simulate(m, a)), lab(simulate(m, b))
	return math.Sqrt((p[0]-q[0])*(p[0]-q[0]) + (p[1]-q[1])*(p[1]-q[1]) + (p[2]-q[2])*(p[2]-q[2]))
}

// TestMachadoMatrices checks the simulation on facts of the model: each
// row of the matrices sums to 1 (white and greys stay unchanged,
// Machado et al. 2009 normalise them so), and pure red and green, far apart
// for normal vision (ΔE76 ≈ 170, computed), come within half of that for
// a protanope and a deuteranope (the red–green confusion the model
// describes).
func TestMachadoMatrices(t *testing.T) {
	for name, m := range map[string][3][3]float64{"protan": machadoProtan, "deutan": machadoDeutan} {
		for i, row := range m {
			if s := row[0] + row[1] + row[2]; math.Abs(s-1) > 1e-5 {
				t.Errorf("%s row %d sums to %.6f, want 1 (±1e-5, the table's rounding)", name, i, s)
			}
		}
		grey := color.RGBA{0x80, 0x80, 0x80, 0xFF}
		if d := deltaE(m, grey, grey); d != 0 {
			t.Errorf("%s: grey changes by %g", name, d)
		}
		g := simulate(m, grey)
		if want := linearise(0x80); math.Abs(g[0]-want) > 1e-5 || math.Abs(g[1]-want) > 1e-5 || math.Abs(g[2]-want) > 1e-5 {
			t.Errorf("%s: grey %.5f becomes %v", name, want, g)
		}
		red, green := color.RGBA{0xFF, 0, 0, 0xFF}, color.RGBA{0, 0xFF, 0, 0xFF}
		if n, d := deltaE(normalVision, red, green), deltaE(m, red, green); !(d < n/2) {
			t.Errorf("%s: red and green ΔE %.1f, normal vision %.1f: want the deficiency to bring them within half", name, d, n)
		}
	}
}

// minLegendDeltaE is the smallest colour difference (CIE 1976 ΔE*ab) any
// two legend colours keep under normal, protan and deutan vision. A ΔE of
// about 2.3 is just noticeable (Sharma & Trussell 1997, from memory); 20
// makes them tell apart at a glance in thin lines (our working choice).
const minLegendDeltaE = 20

// TestPaletteColourVision checks that every pair of legend colours stays
// apart for normal vision and for simulated protanopia and deuteranopia
// (Machado et al. 2009, severity 1.0), and that the target outline stands
// out from the saturated end of the dose wash.
func TestPaletteColourVision(t *testing.T) {
	items := LegendColours()
	for _, v := range []struct {
		name string
		m    [3][3]float64
	}{{"normal", normalVision}, {"protan", machadoProtan}, {"deutan", machadoDeutan}} {
		for a := range items {
			for b := a + 1; b < len(items); b++ {
				if d := deltaE(v.m, items[a].Color, items[b].Color); d < minLegendDeltaE {
					t.Errorf("%s vision: %s and %s differ by ΔE %.1f, want ≥ %d", v.name, items[a].Name, items[b].Name, d, minLegendDeltaE)
				}
			}
		}
		// The target outline on the saturated wash (its top colour).
		if d := deltaE(v.m, ColorTarget, Colormap(1)); d < 3*minLegendDeltaE {
			t.Errorf("%s vision: the target outline and the saturated dose differ by ΔE %.1f, want ≥ %d", v.name, d, 3*minLegendDeltaE)
		}
	}
	// The test itself fails on the palette it replaced, where the target
	// (orange) and the spill (vermillion) were close for a deuteranope.
	if d := deltaE(machadoDeutan, color.RGBA{0xE6, 0x9F, 0x00, 0xFF}, ColorSpill); d >= minLegendDeltaE {
		t.Errorf("orange and vermillion differ by ΔE %.1f for a deuteranope: the check would not catch them", d)
	}
}
