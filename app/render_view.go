//go:build cgo

package main

import (
	"image"
	"image/color"
	"math"

	"dosecover/review/view"
)

// The shared plane renderer of the review packages (review/view), also
// used by the report, so the window and the report draw alike.
func init() {
	renderPlane = renderPlaneShared
	washColour = washColourShared
}

// renderPlaneShared draws the display of transform t as a plane of its
// own (one plane pixel per display pixel), so isolines and outlines are
// traced at screen resolution.
func renderPlaneShared(s *sceneLayers, t viewTransform, opt displayOptions, cache *any) *image.RGBA {
	if t.W <= 0 || t.H <= 0 || !(t.MMPerPixel > 0) {
		return renderPlaneBasic(s, t, opt)
	}
	r, _ := (*cache).(*view.Renderer)
	if r == nil {
		r = view.NewRenderer()
		*cache = r
	}
	p := view.Plane{Origin: t.At(0.5, 0.5), U: t.U, V: t.V, PixelU: t.MMPerPixel, PixelV: t.MMPerPixel, Width: t.W, Height: t.H}
	v := view.View{Width: t.W, Height: t.H, Zoom: 1 / t.MMPerPixel, Centre: view.Point{X: float64(t.W-1) / 2, Y: float64(t.H-1) / 2}}
	sc := &view.Scene{Plane: p, Anatomy: s.Anatomy, Annotations: true, Marker: opt.Marker,
		Window: view.Window{Center: opt.WindowCentre, Width: math.Max(opt.WindowWidth, 1e-6)}}
	if s.Dose != nil {
		sc.Dose = s.Dose
		top := washTop(s.Threshold)
		floor := math.Min(opt.Floor, top/2)
		if !(floor > 0) {
			floor = defaultFloor(s.Threshold)
		}
		sc.Scale = view.DoseScale{Floor: floor, Ceiling: top, Opacity: math.Max(0, math.Min(1, opt.Opacity))}
		sc.Lethal = s.Threshold
		sc.HideWash = !opt.ShowDose
	}
	if opt.ShowContours {
		switch {
		case s.TargetStructure != nil:
			sc.Target = view.Region{Structure: s.TargetStructure}
		case s.Target != nil:
			sc.Target = view.Region{Mask: s.Target}
		}
		if s.Margin != nil {
			sc.Margin = view.Region{Mask: s.Margin}
		}
		for _, a := range s.AvoidStructures {
			sc.Avoid = append(sc.Avoid, view.Region{Structure: a})
		}
	}
	if opt.ShowHoles {
		if s.Holes != nil {
			sc.Holes = view.Region{Mask: s.Holes}
		}
		if s.Outside != nil {
			sc.Spill = view.Region{Mask: s.Outside}
		}
	}
	if s.NotMonitored != nil {
		sc.NotMonitored = view.Region{Mask: s.NotMonitored}
	}
	img, err := r.Render(sc, v, nil)
	if err != nil {
		return renderPlaneBasic(s, t, opt)
	}
	return img
}

// washColour is the colour of dose d on the shared renderer's wash.
func washColourShared(d, floor, top float64) color.RGBA {
	return view.Colormap(view.DoseScale{Floor: floor, Ceiling: top, Opacity: 1}.T(d))
}
