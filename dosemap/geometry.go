package dosemap

import (
	"fmt"
	"math"
)

// Vec3 is a point or a direction in DICOM patient coordinates (LPS, mm).
type Vec3 [3]float64

// Add returns a+b.
func (a Vec3) Add(b Vec3) Vec3 { return Vec3{a[0] + b[0], a[1] + b[1], a[2] + b[2]} }

// Sub returns a-b.
func (a Vec3) Sub(b Vec3) Vec3 { return Vec3{a[0] - b[0], a[1] - b[1], a[2] - b[2]} }

// Scale returns s*a.
func (a Vec3) Scale(s float64) Vec3 { return Vec3{s * a[0], s * a[1], s * a[2]} }

// Dot returns the scalar product a·b.
func (a Vec3) Dot(b Vec3) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

// Cross returns the vector product a×b.
func (a Vec3) Cross(b Vec3) Vec3 {
	return Vec3{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

// Norm returns the Euclidean length of a.
func (a Vec3) Norm() float64 { return math.Sqrt(a.Dot(a)) }

// Unit returns a scaled to length 1. The zero vector is returned unchanged.
func (a Vec3) Unit() Vec3 {
	n := a.Norm()
	if n == 0 {
		return a
	}
	return a.Scale(1 / n)
}

// Geometry describes a regular 3-D grid of voxels in patient space.
//
// The centre of voxel (i, j, k) — column i, row j, slice k — lies at
//
//	P(i, j, k) = Origin + i*Spacing[0]*Row + j*Spacing[1]*Col + k*Spacing[2]*Normal
//
// which is DICOM PS3.3 C.7.6.2.1.1 extended by the slice index: Row is the
// first triplet of ImageOrientationPatient (the direction of increasing column
// index), Col the second triplet (increasing row index), Spacing[0] is the
// column spacing (PixelSpacing[1]), Spacing[1] the row spacing
// (PixelSpacing[0]) and Spacing[2] the distance between slice centres along
// Normal. Origin is ImagePositionPatient of the first slice.
//
// Row, Col and Normal must be unit vectors; Normal need not equal Row×Col
// (a left-handed stack is allowed) but must not lie in the image plane.
type Geometry struct {
	Cols, Rows, Slices int  // grid size along i, j, k
	Spacing            Vec3 // mm between voxel centres along i, j, k
	Origin             Vec3 // centre of voxel (0, 0, 0), mm
	Row, Col, Normal   Vec3 // unit directions of increasing i, j, k
}

// NewAxialGeometry returns an axial grid (Row = +x, Col = +y, Normal = +z)
// of the given size and spacing with its first voxel centre at origin.
func NewAxialGeometry(cols, rows, slices int, spacing, origin Vec3) Geometry {
	return Geometry{
		Cols: cols, Rows: rows, Slices: slices,
		Spacing: spacing, Origin: origin,
		Row: Vec3{1, 0, 0}, Col: Vec3{0, 1, 0}, Normal: Vec3{0, 0, 1},
	}
}

// Len returns the number of voxels, Cols*Rows*Slices.
func (g Geometry) Len() int { return g.Cols * g.Rows * g.Slices }

// SliceLen returns the number of voxels in one slice, Cols*Rows.
func (g Geometry) SliceLen() int { return g.Cols * g.Rows }

// Index returns the flat index of voxel (i, j, k): (k*Rows + j)*Cols + i.
// It does not check bounds.
func (g Geometry) Index(i, j, k int) int { return (k*g.Rows+j)*g.Cols + i }

// IJK returns the voxel indices of flat index n; the inverse of Index.
func (g Geometry) IJK(n int) (i, j, k int) {
	s := g.Cols * g.Rows
	k = n / s
	r := n - k*s
	j = r / g.Cols
	i = r - j*g.Cols
	return i, j, k
}

// Contains reports whether voxel (i, j, k) is inside the grid.
func (g Geometry) Contains(i, j, k int) bool {
	return i >= 0 && j >= 0 && k >= 0 && i < g.Cols && j < g.Rows && k < g.Slices
}

// VoxelVolume returns the volume of one voxel in mm³.
func (g Geometry) VoxelVolume() float64 { return g.Spacing[0] * g.Spacing[1] * g.Spacing[2] }

// Point returns the patient position (mm) of the continuous voxel coordinate
// (i, j, k); integer values are voxel centres (DICOM PS3.3 C.7.6.2.1.1).
func (g Geometry) Point(i, j, k float64) Vec3 {
	return g.Origin.
		Add(g.Row.Scale(i * g.Spacing[0])).
		Add(g.Col.Scale(j * g.Spacing[1])).
		Add(g.Normal.Scale(k * g.Spacing[2]))
}

// Voxel returns the continuous voxel coordinate (i, j, k) of patient
// position p; the inverse of Point. It solves the 3×3 system exactly, so it
// also holds for oblique and non-orthogonal stacks.
func (g Geometry) Voxel(p Vec3) (i, j, k float64) {
	a := g.Row.Scale(g.Spacing[0])
	b := g.Col.Scale(g.Spacing[1])
	c := g.Normal.Scale(g.Spacing[2])
	d := p.Sub(g.Origin)
	det := a.Dot(b.Cross(c))
	if det == 0 {
		return math.NaN(), math.NaN(), math.NaN()
	}
	// Cramer's rule.
	i = d.Dot(b.Cross(c)) / det
	j = a.Dot(d.Cross(c)) / det
	k = a.Dot(b.Cross(d)) / det
	return i, j, k
}

// Validate reports the first problem that makes g unusable: a non-positive
// size or spacing, a direction that is not a unit vector, or a slice normal
// lying in the image plane.
func (g Geometry) Validate() error {
	if g.Cols <= 0 || g.Rows <= 0 || g.Slices <= 0 {
		return fmt.Errorf("grid size %d×%d×%d is not positive", g.Cols, g.Rows, g.Slices)
	}
	for n, s := range g.Spacing {
		if !(s > 0) || math.IsInf(s, 0) {
			return fmt.Errorf("spacing %g mm along axis %d is not positive", s, n)
		}
	}
	for _, d := range []struct {
		name string
		v    Vec3
	}{{"row direction", g.Row}, {"column direction", g.Col}, {"slice normal", g.Normal}} {
		if n := d.v.Norm(); math.Abs(n-1) > 1e-3 {
			return fmt.Errorf("%s %v is not a unit vector (length %g)", d.name, d.v, n)
		}
	}
	if math.Abs(g.Row.Dot(g.Col)) > 1e-3 {
		return fmt.Errorf("row %v and column %v directions are not orthogonal", g.Row, g.Col)
	}
	if math.Abs(g.Normal.Dot(g.Row.Cross(g.Col))) < 0.1 {
		return fmt.Errorf("slice normal %v lies in the image plane", g.Normal)
	}
	return nil
}

// SameGrid reports whether g and o have the same size and every voxel centre
// of g lies within tol mm of the corresponding voxel centre of o. Checking
// the eight corner voxels suffices because both grids are affine.
func (g Geometry) SameGrid(o Geometry, tol float64) bool {
	if g.Cols != o.Cols || g.Rows != o.Rows || g.Slices != o.Slices {
		return false
	}
	for _, c := range [8][3]int{{0, 0, 0}, {1, 0, 0}, {0, 1, 0}, {1, 1, 0}, {0, 0, 1}, {1, 0, 1}, {0, 1, 1}, {1, 1, 1}} {
		i := float64(c[0] * (g.Cols - 1))
		j := float64(c[1] * (g.Rows - 1))
		k := float64(c[2] * (g.Slices - 1))
		if g.Point(i, j, k).Sub(o.Point(i, j, k)).Norm() > tol {
			return false
		}
	}
	return true
}

// String returns a short human-readable description of g.
func (g Geometry) String() string {
	return fmt.Sprintf("%d×%d×%d voxels of %.3g×%.3g×%.3g mm at (%.1f, %.1f, %.1f) mm",
		g.Cols, g.Rows, g.Slices, g.Spacing[0], g.Spacing[1], g.Spacing[2],
		g.Origin[0], g.Origin[1], g.Origin[2])
}
