package view

import (
	"fmt"
	"image/color"
	"math"
	"slices"

	"dosecover/dosemap"
)

// Window is a display window for the anatomy: Center and Width in stored
// units after rescale, as WindowCenter (0028,1050) and WindowWidth
// (0028,1051).
type Window struct {
	Center, Width float64
}

// Grey maps x through the window with the DICOM linear VOI LUT function
// (PS3.3 C.11.2.1.2.1, VOI LUT Function LINEAR) onto 0..255:
//
//	x <= c - 0.5 - (w-1)/2:  y = 0
//	x >  c - 0.5 + (w-1)/2:  y = 255
//	otherwise:               y = ((x - (c - 0.5)) / (w-1) + 0.5) * 255
//
// A width below 1 is treated as 1 (the standard requires w >= 1). NaN maps
// to 0 (black).
func (win Window) Grey(x float64) uint8 {
	s, o := win.affine()
	y := x*s + o
	switch {
	case !(y > 0): // also NaN
		return 0
	case y >= 255:
		return 255
	}
	return uint8(y + 0.5)
}

// affine returns slope and offset of the window's linear part in 0..255
// output units: y = x*slope + offset (before clipping).
func (win Window) affine() (slope, offset float64) {
	w := math.Max(win.Width, 1)
	if w == 1 {
		// Threshold at c - 0.5: a step, realised as a very steep ramp.
		return 1e12, -(win.Center - 0.5) * 1e12
	}
	slope = 255 / (w - 1)
	offset = (0.5 - (win.Center-0.5)/(w-1)) * 255
	return slope, offset
}

// AutoWindow returns a window spanning the 1st to 99th percentile of the
// finite values of vol (common practice for images without a stored
// window), or {0, 1} when vol holds none.
func AutoWindow(vol *dosemap.Volume) Window {
	if vol == nil {
		return Window{0, 1}
	}
	// A strided subsample keeps this fast on large volumes.
	step := max(1, len(vol.Data)/200000)
	vals := make([]float32, 0, len(vol.Data)/step+1)
	for n := 0; n < len(vol.Data); n += step {
		if v := vol.Data[n]; !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0) {
			vals = append(vals, v)
		}
	}
	if len(vals) == 0 {
		return Window{0, 1}
	}
	slices.Sort(vals)
	lo := float64(vals[len(vals)/100])
	hi := float64(vals[(len(vals)-1)*99/100])
	if hi <= lo {
		return Window{Center: lo + 0.5, Width: 1}
	}
	// Invert C.11.2.1.2.1: lo maps to 0 and hi to 255.
	return Window{Center: (lo + hi + 1) / 2, Width: hi - lo + 1}
}

// DoseScale maps cumulative thermal dose onto the colourwash on a
// logarithmic scale:
//
//	t = (log10 D - log10 Floor) / (log10 Ceiling - log10 Floor)
//
// clipped to [0, 1]. Doses below Floor (and NaN) are transparent; doses
// above Ceiling take the top colour. Doses of 1e-9 CEM43 or less count as
// zero. Opacity (0..1) is the alpha of the
// wash over the anatomy.
type DoseScale struct {
	Floor, Ceiling float64 // CEM43 minutes, 0 < Floor < Ceiling
	Opacity        float64
}

// DefaultDoseScale returns the wash from 1 to 1000 CEM43 at 55 % opacity.
func DefaultDoseScale() DoseScale { return DoseScale{Floor: 1, Ceiling: 1000, Opacity: 0.55} }

// Validate reports a floor or ceiling that cannot make a log scale.
func (s DoseScale) Validate() error {
	if !(s.Floor > 0) || !(s.Ceiling > s.Floor) || math.IsInf(s.Ceiling, 0) {
		return fmt.Errorf("dose scale %g to %g CEM43 needs 0 < floor < ceiling", s.Floor, s.Ceiling)
	}
	if !(s.Opacity >= 0 && s.Opacity <= 1) {
		return fmt.Errorf("dose opacity %g is outside 0..1", s.Opacity)
	}
	return nil
}

// T returns the position of dose d on the scale, in [0, 1], or -1 when d
// is below the floor or NaN (transparent).
func (s DoseScale) T(d float64) float64 {
	if !(d >= s.Floor) {
		return -1
	}
	t := math.Log10(d/s.Floor) / math.Log10(s.Ceiling/s.Floor)
	return math.Min(t, 1)
}

// Dose returns the dose at scale position t in [0, 1]; the inverse of T.
func (s DoseScale) Dose(t float64) float64 {
	return s.Floor * math.Pow(s.Ceiling/s.Floor, t)
}

// viridis holds 17 control points of the viridis colour map (van der Walt,
// Smith & Firing, matplotlib 2015; BIDS colormap, CC0): entries 0, 16, 32,
// ..., 240 and 255 of its 256-entry table. Viridis is perceptually uniform,
// monotonic in lightness and readable with the common colour-vision
// deficiencies. Between control points Colormap interpolates linearly in
// sRGB, which differs from the full table by at most a few levels.
var viridis = [17][3]uint8{
	{0x44, 0x01, 0x54}, {0x48, 0x18, 0x6a}, {0x47, 0x2d, 0x7b}, {0x42, 0x40, 0x86},
	{0x3b, 0x52, 0x8b}, {0x33, 0x63, 0x8d}, {0x2c, 0x72, 0x8e}, {0x26, 0x82, 0x8e},
	{0x21, 0x91, 0x8c}, {0x1f, 0xa0, 0x88}, {0x28, 0xae, 0x80}, {0x3f, 0xbc, 0x73},
	{0x5e, 0xc9, 0x62}, {0x84, 0xd4, 0x4b}, {0xad, 0xdc, 0x30}, {0xd8, 0xe2, 0x19},
	{0xfd, 0xe7, 0x25},
}

// viridisPos is the position in [0, 1] of each control point.
func viridisPos(n int) float64 {
	if n == 16 {
		return 1
	}
	return float64(16*n) / 255
}

// Colormap returns the opaque viridis colour at t in [0, 1] (clipped).
func Colormap(t float64) color.RGBA {
	t = math.Max(0, math.Min(1, t))
	n := 0
	for n < 15 && t > viridisPos(n+1) {
		n++
	}
	f := (t - viridisPos(n)) / (viridisPos(n+1) - viridisPos(n))
	a, b := viridis[n], viridis[n+1]
	mix := func(p, q uint8) uint8 { return uint8(float64(p) + (float64(q)-float64(p))*f + 0.5) }
	return color.RGBA{mix(a[0], b[0]), mix(a[1], b[1]), mix(a[2], b[2]), 0xFF}
}

// lutSize is the number of entries of the colourwash lookup table.
const lutSize = 256

// colormapLUT returns Colormap sampled at lutSize evenly spaced positions.
func colormapLUT() *[lutSize][3]uint8 {
	var lut [lutSize][3]uint8
	for n := range lut {
		c := Colormap(float64(n) / (lutSize - 1))
		lut[n] = [3]uint8{c.R, c.G, c.B}
	}
	return &lut
}

var washLUT = colormapLUT()
