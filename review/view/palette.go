package view

import "image/color"

// The overlay palette shared by the review window and the reports. The
// colours are taken from the Okabe–Ito set (Okabe & Ito, "Color Universal
// Design", 2008) and assigned so that every pair stays apart under
// simulated protanopia and deuteranopia (Machado, Oliveira & Fernandes
// 2009; TestPaletteColourVision): the target is a light blue that reads on
// the whole dose wash, up to its saturated yellow, and looks nothing like
// the vermillion of lethal dose outside the margin. Each overlay also
// differs in line style or fill, so no meaning rests on hue alone.
var (
	ColorTarget       = color.RGBA{0x56, 0xB4, 0xE9, 0xFF} // sky blue, solid line
	ColorMargin       = color.RGBA{0xCC, 0x79, 0xA7, 0xFF} // reddish purple, dashed line
	ColorLethal       = color.RGBA{0xFF, 0xFF, 0xFF, 0xFF} // white, thick line (lethal isoline)
	ColorHole         = color.RGBA{0xF0, 0xE4, 0x42, 0xFF} // yellow, hatched fill
	ColorSpill        = color.RGBA{0xD5, 0x5E, 0x00, 0xFF} // vermillion, filled (lethal outside the margin)
	ColorAvoid        = color.RGBA{0x00, 0x72, 0xB2, 0xFF} // blue, dotted line
	ColorNotMonitored = color.RGBA{0x50, 0x50, 0x50, 0xFF} // dark grey, cross-hatch (not monitored)
	// ColorPlane draws where a sonication's measured planes meet a view
	// (its trace): a violet of our own outside the Okabe–Ito set, chosen
	// for the largest smallest distance (CIE 1976 ΔE, normal, protan and
	// deutan vision) to the other overlays, the isodose grey and the
	// viridis wash among colours light enough to read on dark anatomy.
	ColorPlane = color.RGBA{0x99, 0x66, 0xFF, 0xFF} // violet, thin solid lines; dashed slab outline when selected
)

// LegendColours lists the overlay colours by the names the legends give
// them, in legend order.
func LegendColours() []NamedColour {
	return []NamedColour{
		{"lethal isodose", ColorLethal}, {"target", ColorTarget}, {"safety margin", ColorMargin},
		{"avoid structure", ColorAvoid}, {"hole", ColorHole}, {"lethal outside margin", ColorSpill},
		{"not monitored", ColorNotMonitored}, {"measured plane", ColorPlane},
	}
}

// NamedColour is a legend colour and its name.
type NamedColour struct {
	Name  string
	Color color.RGBA
}
