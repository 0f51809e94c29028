package view

import (
	"fmt"
	"math"

	"dosecover/dosemap"
)

// Plane is a 2-D sampling grid in patient space. The centre of pixel
// (x, y) — column x, row y — lies at
//
//	P(x, y) = Origin + x*PixelU*U + y*PixelV*V
//
// in the manner of DICOM PS3.3 C.7.6.2.1.1 (Image Plane Module): U plays
// the part of the row direction cosine (increasing column), V of the column
// direction cosine (increasing row). U and V are orthogonal unit vectors;
// on screen x grows to the right and y downwards.
type Plane struct {
	Origin         dosemap.Vec3 // centre of pixel (0, 0), mm
	U, V           dosemap.Vec3 // unit directions of increasing x and y
	PixelU, PixelV float64      // mm between pixel centres along U and V
	Width, Height  int          // pixels along U and V
}

// Point returns the patient position (mm) of the continuous pixel
// coordinate (x, y); integer values are pixel centres.
func (p Plane) Point(x, y float64) dosemap.Vec3 {
	return p.Origin.Add(p.U.Scale(x * p.PixelU)).Add(p.V.Scale(y * p.PixelV))
}

// Pixel returns the continuous pixel coordinate of the orthogonal
// projection of patient position q onto the plane; the inverse of Point for
// points in the plane.
func (p Plane) Pixel(q dosemap.Vec3) (x, y float64) {
	d := q.Sub(p.Origin)
	return d.Dot(p.U) / p.PixelU, d.Dot(p.V) / p.PixelV
}

// Normal returns the unit normal U×V of the plane.
func (p Plane) Normal() dosemap.Vec3 { return p.U.Cross(p.V).Unit() }

// Distance returns the signed distance (mm) of q from the plane along
// Normal.
func (p Plane) Distance(q dosemap.Vec3) float64 { return q.Sub(p.Origin).Dot(p.Normal()) }

// Centre returns the patient position of the centre of the plane's extent.
func (p Plane) Centre() dosemap.Vec3 {
	return p.Point(float64(p.Width-1)/2, float64(p.Height-1)/2)
}

// Len returns Width*Height, the number of samples of the plane.
func (p Plane) Len() int { return p.Width * p.Height }

// Validate reports the first problem that makes p unusable: a non-positive
// size or pixel spacing, or axes that are not orthogonal unit vectors.
func (p Plane) Validate() error {
	if p.Width <= 0 || p.Height <= 0 {
		return fmt.Errorf("plane size %d×%d is not positive", p.Width, p.Height)
	}
	if p.Width > maxSide || p.Height > maxSide {
		return fmt.Errorf("plane size %d×%d exceeds %d pixels a side", p.Width, p.Height, maxSide)
	}
	if !(p.PixelU > 0) || !(p.PixelV > 0) || math.IsInf(p.PixelU, 0) || math.IsInf(p.PixelV, 0) {
		return fmt.Errorf("plane pixel size %g×%g mm is not positive", p.PixelU, p.PixelV)
	}
	if n := p.U.Norm(); math.Abs(n-1) > 1e-3 {
		return fmt.Errorf("plane axis U %v is not a unit vector (length %g)", p.U, n)
	}
	if n := p.V.Norm(); math.Abs(n-1) > 1e-3 {
		return fmt.Errorf("plane axis V %v is not a unit vector (length %g)", p.V, n)
	}
	if math.Abs(p.U.Dot(p.V)) > 1e-3 {
		return fmt.Errorf("plane axes U %v and V %v are not orthogonal", p.U, p.V)
	}
	return nil
}

// maxSide bounds the pixels along each side of a plane or view, so that an
// odd geometry (a tiny pixel size, say) gives an error instead of
// exhausting memory.
const maxSide = 16384

// AcquisitionPlane returns the image plane of slice k of g: pixel (x, y) of
// the plane is voxel (x, y, k) of the grid, so sampling a volume on g
// reproduces slice k exactly.
func AcquisitionPlane(g dosemap.Geometry, k int) Plane {
	return Plane{
		Origin: g.Point(0, 0, float64(k)),
		U:      g.Row, V: g.Col,
		PixelU: g.Spacing[0], PixelV: g.Spacing[1],
		Width: g.Cols, Height: g.Rows,
	}
}

// Orientation names a plane spanned by two axes of a Geometry.
type Orientation int

// Plane orientations relative to a grid.
const (
	// Acquisition is the image plane of the grid: Row and Col directions.
	Acquisition Orientation = iota
	// RowNormal contains the row direction and the slice normal (for an
	// axial stack, a coronal plane).
	RowNormal
	// ColNormal contains the column direction and the slice normal (for an
	// axial stack, a sagittal plane).
	ColNormal
)

// String returns "acquisition", "row-normal" or "column-normal".
func (o Orientation) String() string {
	switch o {
	case Acquisition:
		return "acquisition"
	case RowNormal:
		return "row-normal"
	case ColNormal:
		return "column-normal"
	}
	return fmt.Sprintf("Orientation(%d)", int(o))
}

// PlaneThrough returns the plane of orientation o through patient point q,
// covering the whole extent of grid g (its voxels' boxes projected onto the
// plane) with square pixels of pixelMM (0: the finest spacing of the two
// grid axes spanning the plane).
//
// For Acquisition the plane keeps the grid's own Row and Col axes, so with
// q on a slice centre it equals AcquisitionPlane. For the reformats the
// in-plane axes are the grid's (Row or Col, Normal), with the signs chosen
// for the usual display: the screen's downward direction points inferior,
// posterior or left (whichever patient axis dominates) and the rightward
// direction points left, posterior or inferior in the same way, as with the
// standard axial, coronal and sagittal presentation (common practice).
func PlaneThrough(g dosemap.Geometry, o Orientation, q dosemap.Vec3, pixelMM float64) Plane {
	var u, v dosemap.Vec3
	var su, sv float64
	switch o {
	case RowNormal:
		u, v, su, sv = g.Row, g.Normal, g.Spacing[0], g.Spacing[2]
	case ColNormal:
		u, v, su, sv = g.Col, g.Normal, g.Spacing[1], g.Spacing[2]
	default:
		u, v, su, sv = g.Row, g.Col, g.Spacing[0], g.Spacing[1]
	}
	if o != Acquisition {
		// The slice normal need not be orthogonal to the image plane
		// (a sheared stack): keep the plane orthogonal.
		v = v.Sub(u.Scale(v.Dot(u))).Unit()
		u, v = displayRight(u), displayDown(v)
	}
	if pixelMM <= 0 {
		pixelMM = math.Min(su, sv)
		if o == Acquisition {
			return fitPlane(g, q, u, v, su, sv)
		}
	}
	return fitPlane(g, q, u, v, pixelMM, pixelMM)
}

// ObliquePlane returns a plane through q with in-plane axes u and v (v is
// made orthogonal to u; both are normalised) that covers the whole extent
// of grid g with pixels of pixelMM (0: the finest spacing of g).
func ObliquePlane(g dosemap.Geometry, q, u, v dosemap.Vec3, pixelMM float64) (Plane, error) {
	u = u.Unit()
	v = v.Sub(u.Scale(v.Dot(u))).Unit()
	if u.Norm() == 0 || v.Norm() == 0 {
		return Plane{}, fmt.Errorf("oblique plane axes %v and %v do not span a plane", u, v)
	}
	if pixelMM <= 0 {
		pixelMM = math.Min(g.Spacing[0], math.Min(g.Spacing[1], g.Spacing[2]))
	}
	p := fitPlane(g, q, u, v, pixelMM, pixelMM)
	if err := p.Validate(); err != nil {
		return Plane{}, fmt.Errorf("oblique plane: %w", err)
	}
	return p, nil
}

// fitPlane returns the plane through q with axes u, v whose pixel grid
// covers the projection of g's voxel boxes. The pixel grid is aligned so
// that the projection of g.Origin falls on a pixel centre, which makes the
// acquisition plane reproduce the voxel grid exactly.
func fitPlane(g dosemap.Geometry, q, u, v dosemap.Vec3, pu, pv float64) Plane {
	minU, maxU := math.Inf(1), math.Inf(-1)
	minV, maxV := math.Inf(1), math.Inf(-1)
	for c := 0; c < 8; c++ {
		i := -0.5 + float64(c&1)*float64(g.Cols)
		j := -0.5 + float64(c>>1&1)*float64(g.Rows)
		k := -0.5 + float64(c>>2&1)*float64(g.Slices)
		d := g.Point(i, j, k).Sub(g.Origin)
		a, b := d.Dot(u), d.Dot(v)
		minU, maxU = math.Min(minU, a), math.Max(maxU, a)
		minV, maxV = math.Min(minV, b), math.Max(maxV, b)
	}
	// Pixel centres at g.Origin + (x0+x)*pu along u, from the first centre
	// inside the projected box to the last.
	x0 := math.Ceil(minU/pu - 1e-9)
	x1 := math.Floor(maxU/pu + 1e-9)
	y0 := math.Ceil(minV/pv - 1e-9)
	y1 := math.Floor(maxV/pv + 1e-9)
	n := u.Cross(v).Unit()
	// Origin: g.Origin shifted within the plane, then moved along the
	// normal to pass through q.
	o := g.Origin.Add(u.Scale(x0 * pu)).Add(v.Scale(y0 * pv))
	o = o.Add(n.Scale(q.Sub(o).Dot(n)))
	return Plane{
		Origin: o, U: u, V: v, PixelU: pu, PixelV: pv,
		Width: max(1, int(x1-x0)+1), Height: max(1, int(y1-y0)+1),
	}
}

// dominant returns the index of the largest-magnitude component of d.
func dominant(d dosemap.Vec3) int {
	a := 0
	for n := 1; n < 3; n++ {
		if math.Abs(d[n]) > math.Abs(d[a]) {
			a = n
		}
	}
	return a
}

// displayDown flips d so that it points towards patient left (+x),
// posterior (+y) or inferior (-z), whichever axis dominates: the downward
// direction of the usual axial (posterior down), coronal and sagittal
// (inferior down) presentations.
func displayDown(d dosemap.Vec3) dosemap.Vec3 {
	a := dominant(d)
	if (a == 2 && d[2] > 0) || (a != 2 && d[a] < 0) {
		return d.Scale(-1)
	}
	return d
}

// displayRight flips d so that it points towards patient left (+x),
// posterior (+y) or inferior (-z): the rightward direction of the usual
// axial and coronal (patient left on the viewer's right) and sagittal
// (posterior on the right) presentations.
func displayRight(d dosemap.Vec3) dosemap.Vec3 { return displayDown(d) }

// NearestSlice returns the index of the slice of g whose centre plane is
// nearest to patient point q, clamped to the grid: with AcquisitionPlane it
// gives the acquired image through a point.
func NearestSlice(g dosemap.Geometry, q dosemap.Vec3) int {
	_, _, k := g.Voxel(q)
	if k != k {
		return 0
	}
	return max(0, min(g.Slices-1, int(math.Round(k))))
}
