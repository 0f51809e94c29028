//go:build cgo

package main

import (
	"image"
	"image/color"

	"dosecover/dosemap"
	"dosecover/review/view"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/math/fixed"
)

// sceneLayers is everything the viewer can draw for one case.
type sceneLayers struct {
	Anatomy   *dosemap.Volume // nil: no anatomy series
	Dose      *dosemap.Volume // cumulative (or selected sonication's) dose; nil before analysis
	Threshold float64         // lethal threshold, Dose's unit
	// Masks, each on its own grid (value >= 0.5 inside); nil when absent.
	Target, Margin, Holes, Outside, Avoid *dosemap.Volume
	NotMonitored                          *dosemap.Volume
	TargetStructure                       *dosemap.Structure
	AvoidStructures                       []*dosemap.Structure
	// Planes are the sonications' measured stacks whose traces are drawn
	// (view.CaseStacks; nil on a single shared slab).
	Planes []view.MeasuredStack
}

// displayOptions are the viewer's display choices.
type displayOptions struct {
	WindowCentre, WindowWidth float64
	Opacity                   float64 // 0..1 of the dose colourwash
	Floor                     float64 // dose below which the wash is transparent
	ShowDose, ShowContours    bool
	ShowHoles                 bool
	ShowPlanes                bool          // traces of the measured planes
	Marker                    *dosemap.Vec3 // pinned probe point, drawn as a cross
}

// renderPlane composites one view with the renderer of review/view, the
// one the report uses too (render_view.go). cache holds the renderer's
// state between calls for one viewer.
func renderPlane(s *sceneLayers, t viewTransform, opt displayOptions, cache *any) *image.RGBA {
	return renderPlaneShared(s, t, opt, cache)
}

// washColour is the colour of dose d in the wash legend: that of the
// renderer's dose wash.
func washColour(d, floor, top float64) color.RGBA {
	return view.Colormap(view.DoseScale{Floor: floor, Ceiling: top, Opacity: 1}.T(d))
}

// washTop is the dose drawn at full colour: the ceiling of the scale the
// reports use too (view.WashScale).
func washTop(threshold float64) float64 { return view.WashScale(threshold).Ceiling }

// label draws s with a dark shadow, baseline at (x, y).
func label(img *image.RGBA, x, y int, s string, c color.RGBA) {
	for _, o := range []struct {
		dx, dy int
		c      color.RGBA
	}{{1, 1, color.RGBA{0, 0, 0, 0xFF}}, {0, 0, c}} {
		d := font.Drawer{Dst: img, Src: image.NewUniform(o.c), Face: basicfont.Face7x13,
			Dot: fixed.P(x+o.dx, y+o.dy)}
		d.DrawString(s)
	}
}
