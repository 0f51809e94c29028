package view

import (
	"image/color"
	"math"
	"testing"
)

// TestContrastRatio checks the WCAG 2.x formulas on worked values: black
// on white is 21:1 and a colour on itself 1:1 (WCAG 2.1, definition
// "contrast ratio": the range is 1 to 21); #767676 on white is the
// lightest grey that passes AA, 4.54:1, and #777777 just fails at 4.48:1
// (from memory; recomputed here from the formulas: L(#767676) = 0.1812,
// 1.05/0.2312 = 4.54). Tolerance 0.005, the rounding of the quoted ratios.
func TestContrastRatio(t *testing.T) {
	white, black := color.White, color.Black
	for _, c := range []struct {
		a, b color.Color
		want float64
	}{
		{black, white, 21},
		{white, white, 1},
		{color.Gray{0x76}, white, 4.54},
		{color.Gray{0x77}, white, 4.48},
	} {
		if got := ContrastRatio(c.a, c.b); math.Abs(got-c.want) > 0.005 {
			t.Errorf("contrast %v on %v: %.3f, want %.2f", c.a, c.b, got, c.want)
		}
	}
}

// TestLegendTextContrast: the text of the legends and colour bars, white
// and grey, meets WCAG 2 AA (4.5:1, success criterion 1.4.3) on their
// panel.
func TestLegendTextContrast(t *testing.T) {
	for name, c := range map[string]color.RGBA{"text": textColor, "grey text": dimColor} {
		if r := ContrastRatio(c, panelColor); r < 4.5 {
			t.Errorf("legend %s %v on %v: %.2f:1, want ≥ 4.5:1", name, c, panelColor, r)
		}
	}
}

// TestFormatDose: one format for doses, no negative zero.
func TestFormatDose(t *testing.T) {
	for _, c := range []struct {
		d    float64
		want string
	}{{0, "0"}, {math.Copysign(0, -1), "0"}, {0.0123, "0.012"}, {2.4, "2.4"}, {240, "240"}, {9724.4, "9724"}, {314159, "314159"}, {3.2e6, "3.2e+06"}, {math.NaN(), "—"}} {
		if got := FormatDose(c.d); got != c.want {
			t.Errorf("FormatDose(%g) = %q, want %q", c.d, got, c.want)
		}
	}
}
