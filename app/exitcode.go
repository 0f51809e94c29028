//go:build cgo

package main

import (
	"errors"
	"flag"
)

// Exit codes of every subcommand.
const (
	exitOK      = 0 // done
	exitFailure = 1 // could not be done; the reason was printed
	exitUsage   = 2 // the command line is wrong; the problem and the usage were printed
)

// parseFailed returns the exit code for an error of flag.FlagSet.Parse,
// which has printed its message already: 0 for a request for help (-h,
// --help, as Go's flag package does on its own), else a usage error.
func parseFailed(err error) int {
	if errors.Is(err, flag.ErrHelp) {
		return exitOK
	}
	return exitUsage
}
