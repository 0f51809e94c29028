package dicomio_test

import (
	"fmt"
	"os"

	"dosecover/dosemap/dicomio"
)

// RoleOf maps RTROIInterpretedType to the role a structure plays.
func ExampleRoleOf() {
	for _, t := range []string{"PTV", "GTV", "AVOIDANCE", "ORGAN", "EXTERNAL", ""} {
		fmt.Printf("%-9q %v\n", t, dicomio.RoleOf(t))
	}
	// Output:
	// "PTV"     target
	// "GTV"     target
	// "AVOIDANCE" avoid
	// "ORGAN"   avoid
	// "EXTERNAL" other
	// ""        other
}

// An Inventory written for a person; Scan and Load fill it from a folder.
func ExampleInventory_WriteText() {
	inv := &dicomio.Inventory{
		Dir: "case01", Files: 2,
		Skipped:       []dicomio.SkippedFile{{Path: "notes.txt", Reason: "not a DICOM file"}},
		Problems:      []string{"no anatomy series"},
		NotReviewable: "no thermometry (phase), temperature-map or dose-map series found",
	}
	inv.WriteText(os.Stdout)
	// Output:
	// Case folder: case01
	// Files: 1 read, 1 skipped
	// Reviewable: NO - no thermometry (phase), temperature-map or dose-map series found
	//
	// Series (0):
	//
	// Sonications (0):
	//
	// Structures (0):
	//
	// Skipped files (1):
	//   notes.txt: not a DICOM file
	//
	// Problems (1):
	//   - no anatomy series
}
