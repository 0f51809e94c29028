//go:build !cgo

package main

import (
	"fmt"
	"io"
)

// openGUI stands in for the review window in a build without cgo (the
// window's toolkit needs a C compiler): it says so and fails.
func openGUI(dir string, stderr io.Writer) int {
	what := "The review window"
	if dir != "" {
		what = "Opening " + dir + " in the review window"
	}
	fmt.Fprintf(stderr, "dosecover: %s needs the build with cgo (CGO_ENABLED=1 and a C compiler); this build has the commands only.\n", what)
	fmt.Fprintln(stderr, "Run \"dosecover help\" for the commands.")
	return exitFailure
}
