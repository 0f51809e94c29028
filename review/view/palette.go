package view

import "image/color"

// The overlay palette shared by the review window and the reports. The
// colours are taken from the Okabe–Ito set (Okabe & Ito, "Color Universal
// Design", 2008), chosen to stay distinct under the common forms of colour
// vision deficiency; each overlay also differs in line style or fill, so no
// meaning rests on hue alone.
var (
	ColorTarget       = color.RGBA{0xE6, 0x9F, 0x00, 0xFF} // orange, solid line
	ColorMargin       = color.RGBA{0x56, 0xB4, 0xE9, 0xFF} // sky blue, dashed line
	ColorLethal       = color.RGBA{0xFF, 0xFF, 0xFF, 0xFF} // white, thick line (lethal isoline)
	ColorHole         = color.RGBA{0xCC, 0x79, 0xA7, 0xFF} // reddish purple, hatched fill
	ColorSpill        = color.RGBA{0xD5, 0x5E, 0x00, 0xFF} // vermillion, filled (lethal outside the margin)
	ColorAvoid        = color.RGBA{0xF0, 0xE4, 0x42, 0xFF} // yellow, dotted line
	ColorNotMonitored = color.RGBA{0x99, 0x99, 0x99, 0xFF} // grey, cross-hatch (not monitored)
)
