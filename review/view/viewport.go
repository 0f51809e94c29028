package view

import (
	"math"
)

// View maps a display of Width×Height pixels onto a Plane for zooming and
// panning. Display pixel (i, j) has its centre at continuous display
// coordinate (i+0.5, j+0.5); the display centre (Width/2, Height/2) shows
// plane pixel coordinate Centre, and Zoom display pixels span one mm:
//
//	x = Centre.X + (dx - Width/2) / (Zoom * PixelU)
//	y = Centre.Y + (dy - Height/2) / (Zoom * PixelV)
//
// so non-square plane pixels are shown with their true aspect.
type View struct {
	Width, Height int     // display size in pixels
	Zoom          float64 // display pixels per mm
	Centre        Point   // plane pixel coordinate at the display centre
}

// FitView returns the view of w×h display pixels that shows the whole of p
// centred, as large as fits.
func FitView(p Plane, w, h int) View {
	wmm := float64(p.Width) * p.PixelU
	hmm := float64(p.Height) * p.PixelV
	z := math.Min(float64(w)/wmm, float64(h)/hmm)
	return View{Width: w, Height: h, Zoom: z,
		Centre: Point{float64(p.Width-1) / 2, float64(p.Height-1) / 2}}
}

// ToPlane returns the plane pixel coordinate shown at continuous display
// coordinate (dx, dy).
func (v View) ToPlane(p Plane, dx, dy float64) Point {
	return Point{
		X: v.Centre.X + (dx-float64(v.Width)/2)/(v.Zoom*p.PixelU),
		Y: v.Centre.Y + (dy-float64(v.Height)/2)/(v.Zoom*p.PixelV),
	}
}

// ToDisplay returns the continuous display coordinate of plane pixel
// coordinate q; the inverse of ToPlane.
func (v View) ToDisplay(p Plane, q Point) (dx, dy float64) {
	return (q.X-v.Centre.X)*v.Zoom*p.PixelU + float64(v.Width)/2,
		(q.Y-v.Centre.Y)*v.Zoom*p.PixelV + float64(v.Height)/2
}

// PatientAt returns the patient position (mm) shown at display coordinate
// (dx, dy).
func (v View) PatientAt(p Plane, dx, dy float64) (x, y, z float64) {
	q := v.ToPlane(p, dx, dy)
	pt := p.Point(q.X, q.Y)
	return pt[0], pt[1], pt[2]
}

// ZoomAt returns the view magnified by factor about display coordinate
// (dx, dy): the plane point under (dx, dy) stays where it is.
func (v View) ZoomAt(p Plane, dx, dy, factor float64) View {
	if !(factor > 0) {
		return v
	}
	q := v.ToPlane(p, dx, dy)
	v.Zoom *= factor
	// Solve ToPlane(dx, dy) == q for the new centre.
	v.Centre.X = q.X - (dx-float64(v.Width)/2)/(v.Zoom*p.PixelU)
	v.Centre.Y = q.Y - (dy-float64(v.Height)/2)/(v.Zoom*p.PixelV)
	return v
}

// Pan returns the view with the picture moved by (ddx, ddy) display pixels
// (dragging the picture to the right moves it right: ddx > 0).
func (v View) Pan(p Plane, ddx, ddy float64) View {
	v.Centre.X -= ddx / (v.Zoom * p.PixelU)
	v.Centre.Y -= ddy / (v.Zoom * p.PixelV)
	return v
}

// DisplayPlane returns the display's pixel grid as a Plane in patient
// space: pixel (i, j) of the result is display pixel (i, j). Sampling a
// volume on it renders exactly the visible region at display resolution.
func (v View) DisplayPlane(p Plane) Plane {
	q := v.ToPlane(p, 0.5, 0.5)
	return Plane{
		Origin: p.Point(q.X, q.Y), U: p.U, V: p.V,
		PixelU: 1 / v.Zoom, PixelV: 1 / v.Zoom,
		Width: v.Width, Height: v.Height,
	}
}

// valid reports whether v can be drawn.
func (v View) valid() bool {
	return v.Width > 0 && v.Height > 0 && v.Width <= maxSide && v.Height <= maxSide && v.Zoom > 0 && !math.IsInf(v.Zoom, 0) &&
		!math.IsNaN(v.Centre.X) && !math.IsNaN(v.Centre.Y)
}
