package main

import (
	"errors"
	"flag"
)

// The command line of every subcommand: one argument parser (parseArgs)
// and the exit codes.

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

// parseArgs parses fs over args, which may mix options and positional
// arguments in any order ("DIR... -o OUT"; "--" ends the options), and
// returns the positional ones. A parse error has been reported by fs
// already (unless its output is discarded).
func parseArgs(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		// fs.Parse stops at the first positional argument or after "--".
		if len(args) > len(rest) && args[len(args)-len(rest)-1] == "--" {
			return append(pos, rest...), nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}
