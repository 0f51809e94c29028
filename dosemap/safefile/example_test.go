package safefile_test

import (
	"errors"
	"fmt"
	"path/filepath"

	"dosecover/dosemap/safefile"
)

func ExampleCheckOutside() {
	caseDir := filepath.Join("cases", "phantom")
	err := safefile.CheckOutside(caseDir, filepath.Join(caseDir, "report.png"))
	fmt.Println(errors.Is(err, safefile.ErrInsideInput))
	fmt.Println(safefile.CheckOutside(caseDir, filepath.Join("reports", "phantom.png")))
	// Output:
	// true
	// <nil>
}
