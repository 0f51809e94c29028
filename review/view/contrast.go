package view

import (
	"image/color"
	"math"
)

// relativeLuminance returns the relative luminance of c as WCAG 2.x
// defines it (WCAG 2.1, definition "relative luminance"): the sRGB
// components linearised (c ≤ 0.04045: c/12.92, else ((c+0.055)/1.055)^2.4;
// WCAG prints 0.03928, which gives the same result for 8-bit values) and
// weighted L = 0.2126 R + 0.7152 G + 0.0722 B. A translucent colour is
// taken as it is, without its alpha.
func relativeLuminance(c color.Color) float64 {
	r, g, b, a := c.RGBA()
	if a == 0 {
		return 0
	}
	lin := func(v uint32) float64 {
		x := float64(v) / float64(a) // un-premultiply
		if x <= 0.04045 {
			return x / 12.92
		}
		return math.Pow((x+0.055)/1.055, 2.4)
	}
	return 0.2126*lin(r) + 0.7152*lin(g) + 0.0722*lin(b)
}

// ContrastRatio returns the WCAG 2.x contrast ratio of two colours,
// (L1 + 0.05) / (L2 + 0.05) with L1 the lighter (WCAG 2.1, definition
// "contrast ratio"); from 1 to 21. Success criterion 1.4.3 (level AA)
// asks 4.5 for normal text.
func ContrastRatio(a, b color.Color) float64 {
	la, lb := relativeLuminance(a), relativeLuminance(b)
	if la < lb {
		la, lb = lb, la
	}
	return (la + 0.05) / (lb + 0.05)
}
