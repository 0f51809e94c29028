// Package dosemap holds the numerical core of dosecover: voxel grids in DICOM
// patient coordinates, PRF-shift thermometry, and thermal-dose models.
//
// Conventions used throughout the package:
//
//   - Positions are in millimetres in the DICOM patient coordinate system
//     (LPS: +x towards the patient's left, +y posterior, +z superior).
//   - Voxel data are stored flat in []float32 with the column index i varying
//     fastest, then the row index j, then the slice index k:
//     index = (k*Rows + j)*Cols + i, like image.RGBA's row-major layout.
//   - NaN in a temperature or dose volume means "no valid measurement". Every
//     consumer treats NaN as missing, never as zero.
//   - Temperatures are in degrees Celsius, times in seconds, thermal dose in
//     CEM43 minutes.
//
// The package itself imports only the standard library, gonum and
// golang.org/x/sys/cpu (to choose the vector kernels of the hot loops); it
// reads no files and knows nothing of the user interface. Its
// subpackages hold what touches files: dicomio reads a DICOM case folder
// into a Case, deid writes de-identified copies, sim simulates sessions
// and writes them as DICOM, safefile writes outputs atomically.
package dosemap
