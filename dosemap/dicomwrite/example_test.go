package dicomwrite_test

import (
	"fmt"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomwrite"
)

// Decimal strings keep 10 significant digits within the 16 characters
// DICOM allows (PS3.5 6.2).
func ExampleDS() {
	fmt.Println(dicomwrite.DS(1.0/3), dicomwrite.DS(-1.0/3*1e-100), dicomwrite.DS(960))
	// Output: 0.3333333333 -3.33333333e-101 960
}

// A contour's points go into ContourData as one pre-joined value, x, y, z
// of each point in turn, in mm to 1 µm.
func ExampleContourData() {
	square := []dosemap.Vec3{{0, 0, 12.5}, {10, 0, 12.5}, {10, 10, 12.5}, {0, 10, 12.5}}
	fmt.Println(dicomwrite.ContourData(square))
	// Output: 0.000\0.000\12.500\10.000\0.000\12.500\10.000\10.000\12.500\0.000\10.000\12.500
}
