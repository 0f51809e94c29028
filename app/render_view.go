//go:build cgo

package main

import (
	"image"
	"image/color"
	"math"
	"sync"

	"dosecover/dosemap"
	"dosecover/review/view"
)

// sharedView is the shared renderer's state for one viewer: renderers of
// the latest slices shown or prepared (each keeps the samples, isolines and
// outlines of its slice's plane), the scene handed to them and the
// destination image, all reused from one frame to the next. After each
// frame the neighbouring slices are prepared on other goroutines, so that
// stepping through the slices finds them ready. The pool is guarded by mu;
// the drawing itself happens on the UI goroutine only.
type sharedView struct {
	scene view.Scene
	avoid []view.Region
	dst   *image.RGBA

	mu      sync.Mutex
	layers  sceneLayers // what the pooled renderers were prepared for
	gen     int         // bumped when layers change; late preparations are dropped
	pool    []pooledRenderer
	pending map[view.Plane]bool
	wg      sync.WaitGroup // preparations under way
}

// pooledRenderer is a renderer holding the work of one plane.
type pooledRenderer struct {
	plane view.Plane
	r     *view.Renderer
}

// slicePool is the number of slices whose work a viewer keeps.
const slicePool = 6

// prefetchSlices turns the background preparation of the neighbouring
// slices on (benchmarks turn it off to measure an unprepared slice).
var prefetchSlices = true

// sameLayers reports whether a and b show the same volumes and structures.
func sameLayers(a, b *sceneLayers) bool {
	if a.Anatomy != b.Anatomy || a.Dose != b.Dose || a.Threshold != b.Threshold || a.Target != b.Target ||
		a.Margin != b.Margin || a.Holes != b.Holes || a.Outside != b.Outside || a.Avoid != b.Avoid ||
		a.NotMonitored != b.NotMonitored || a.TargetStructure != b.TargetStructure ||
		len(a.AvoidStructures) != len(b.AvoidStructures) {
		return false
	}
	for n := range a.AvoidStructures {
		if a.AvoidStructures[n] != b.AvoidStructures[n] {
			return false
		}
	}
	return true
}

// renderer returns the renderer for plane p, most recently used first: the
// one holding p, else a new one while the pool has room, else the least
// recently used. When the layers differ from those the pool was prepared
// for, the pool is emptied (so no renderer keeps fields of old masks).
func (sv *sharedView) renderer(s *sceneLayers, p view.Plane) *view.Renderer {
	sv.mu.Lock()
	defer sv.mu.Unlock()
	if !sameLayers(&sv.layers, s) {
		sv.layers = *s
		sv.layers.AvoidStructures = append([]*dosemap.Structure(nil), s.AvoidStructures...)
		sv.pool = nil
		sv.gen++
	}
	for n, e := range sv.pool {
		if e.plane == p {
			copy(sv.pool[n:], sv.pool[n+1:])
			sv.pool[len(sv.pool)-1] = e
			return e.r
		}
	}
	e := pooledRenderer{plane: p}
	if len(sv.pool) < slicePool {
		e.r = view.NewRenderer()
	} else {
		e.r = sv.pool[0].r
		sv.pool = sv.pool[1:]
	}
	sv.pool = append(sv.pool, e)
	return e.r
}

// prefetch prepares, on other goroutines, the slices next to the one of t
// that the pool does not hold yet, for scene sc.
func (sv *sharedView) prefetch(t viewTransform, sc *view.Scene) {
	sv.mu.Lock()
	defer sv.mu.Unlock()
	for _, d := range []int{1, -1} {
		f, ok := t.Slice.neighbour(d)
		if !ok {
			continue
		}
		nt := t
		nt.Slice = f
		p, ok := slicePlane(nt)
		if !ok || sv.pending[p] {
			continue
		}
		held := false
		for _, e := range sv.pool {
			held = held || e.plane == p
		}
		if held {
			continue
		}
		if sv.pending == nil {
			sv.pending = map[view.Plane]bool{}
		}
		sv.pending[p] = true
		job := *sc
		job.Plane = p
		job.Avoid = append([]view.Region(nil), sc.Avoid...)
		gen := sv.gen
		sv.wg.Add(1)
		go func() {
			defer sv.wg.Done()
			r := view.NewRenderer()
			err := r.Prepare(&job)
			sv.mu.Lock()
			defer sv.mu.Unlock()
			delete(sv.pending, p)
			if err != nil || gen != sv.gen {
				return
			}
			for _, e := range sv.pool {
				if e.plane == p {
					return // drawn meanwhile
				}
			}
			sv.pool = append(sv.pool, pooledRenderer{plane: p, r: r})
			if len(sv.pool) > slicePool {
				sv.pool = sv.pool[1:]
			}
		}()
	}
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
		return image.NewRGBA(image.Rect(0, 0, max(t.W, 1), max(t.H, 1)))
	}
	sv, _ := (*cache).(*sharedView)
	if sv == nil {
		sv = &sharedView{}
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
	if opt.ShowPlanes {
		sc.Measured = s.Planes
	}
	img, err := sv.renderer(s, p).Render(sc, v, sv.dst)
	if err != nil {
		// Say so on the view rather than draw something else.
		img = image.NewRGBA(image.Rect(0, 0, t.W, t.H))
		label(img, 8, 20, "cannot draw this view: "+err.Error(), color.RGBA{0xF0, 0xF0, 0xF0, 0xFF})
		return img
	}
	sv.dst = img
	if ok && prefetchSlices {
		sv.prefetch(t, sc)
	}
	return img
}
