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

// sharedView is the shared renderer's state for one viewer: the renderer
// (which keeps the samples, isolines and outlines of the current plane),
// the scene handed to it and the destination image, all reused from one
// frame to the next.
type sharedView struct {
	r     *view.Renderer
	scene view.Scene
	avoid []view.Region
	dst   *image.RGBA
}

// slicePlane returns the plane on which the slice of t is sampled: the
// whole slice at its own resolution, the same whatever the zoom, pan and
// display size, so that zooming and panning reuse everything the renderer
// computed for the slice. The second result is false when t does not
// describe its slice.
func slicePlane(t viewTransform) (view.Plane, bool) {
	f := t.Slice
	if !(f.Width > 0 && f.Height > 0 && f.Spacing > 0) {
		return view.Plane{}, false
	}
	px := f.slicePlanePixel()
	w := max(1, int(math.Ceil(f.Width/px-1e-9)))
	h := max(1, int(math.Ceil(f.Height/px-1e-9)))
	o := f.Centre.Sub(t.U.Scale(float64(w-1) / 2 * px)).Sub(t.V.Scale(float64(h-1) / 2 * px))
	return view.Plane{Origin: o, U: t.U, V: t.V, PixelU: px, PixelV: px, Width: w, Height: h}, true
}

// renderPlaneShared draws the display of transform t. The slice is sampled
// once on its own plane (slicePlane) and the display is a view of that
// plane, so a pan or zoom redoes only the per-display-pixel compositing;
// a transform without its slice is drawn as a plane of its own, one plane
// pixel per display pixel. The returned image is reused by the next call.
func renderPlaneShared(s *sceneLayers, t viewTransform, opt displayOptions, cache *any) *image.RGBA {
	if t.W <= 0 || t.H <= 0 || !(t.MMPerPixel > 0) {
		return renderPlaneBasic(s, t, opt)
	}
	sv, _ := (*cache).(*sharedView)
	if sv == nil {
		sv = &sharedView{r: view.NewRenderer()}
		*cache = sv
	}
	p, ok := slicePlane(t)
	var v view.View
	if ok {
		cx, cy := p.Pixel(t.Centre)
		v = view.View{Width: t.W, Height: t.H, Zoom: 1 / t.MMPerPixel, Centre: view.Point{X: cx, Y: cy}}
	} else {
		p = view.Plane{Origin: t.At(0.5, 0.5), U: t.U, V: t.V, PixelU: t.MMPerPixel, PixelV: t.MMPerPixel, Width: t.W, Height: t.H}
		v = view.View{Width: t.W, Height: t.H, Zoom: 1 / t.MMPerPixel, Centre: view.Point{X: float64(t.W-1) / 2, Y: float64(t.H-1) / 2}}
	}
	sc := &sv.scene
	*sc = view.Scene{Plane: p, Anatomy: s.Anatomy, Annotations: true, Marker: opt.Marker,
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
		sv.avoid = sv.avoid[:0]
		for _, a := range s.AvoidStructures {
			sv.avoid = append(sv.avoid, view.Region{Structure: a})
		}
		sc.Avoid = sv.avoid
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
	img, err := sv.r.Render(sc, v, sv.dst)
	if err != nil {
		return renderPlaneBasic(s, t, opt)
	}
	sv.dst = img
	return img
}

// washColour is the colour of dose d on the shared renderer's wash.
func washColourShared(d, floor, top float64) color.RGBA {
	return view.Colormap(view.DoseScale{Floor: floor, Ceiling: top, Opacity: 1}.T(d))
}
