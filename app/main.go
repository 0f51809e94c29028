// Command dosecover reviews thermal-dose coverage after MR-thermometry-guided
// focused-ultrasound ablation. With no arguments it opens the review window;
// with a subcommand it works without a display (see "dosecover help").
package main

import (
	_ "dosecover/app/internal/locale" // must precede the GUI toolkit: see its doc

	"fmt"
	"io"
	"os"
	"runtime"
	"sort"
)

// command is one subcommand of dosecover. Subcommands register themselves
// from their own files with register, so main stays small.
type command struct {
	name    string
	summary string                                            // one line for "dosecover help"
	run     func(args []string, stdout, stderr io.Writer) int // returns the exit code
}

var commands = map[string]command{}

func register(c command) { commands[c.name] = c }

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// run dispatches args and returns the process exit code: 0 success, 1 a
// failure the command explains, 2 a usage error.
func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		return openGUI("", stderr)
	}
	if c, ok := commands[args[0]]; ok {
		// The GUI toolkit locks main to the main OS thread at start-up (its
		// event loop must run there). A subcommand opens no window: unlocked,
		// the goroutine that hands out the work need not wake that one
		// thread every time it waits.
		runtime.UnlockOSThread()
		return c.run(args[1:], stdout, stderr)
	}
	if fi, err := os.Stat(args[0]); err == nil && fi.IsDir() && len(args) == 1 {
		return openGUI(args[0], stderr)
	}
	fmt.Fprintf(stderr, "dosecover: unknown command or folder %q\n\n", args[0])
	usage(stderr)
	return exitUsage
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "usage: dosecover [CASE_DIR]        open the review window (the demo case when no folder is given)")
	fmt.Fprintln(w, "       dosecover COMMAND [options]")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "commands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-12s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Run \"dosecover COMMAND -h\" for the options of a command.")
}

func init() {
	register(command{name: "help", summary: "show this help", run: func(_ []string, stdout, _ io.Writer) int {
		usage(stdout)
		fmt.Fprintln(stdout)
		fmt.Fprintln(stdout, cautionText)
		return exitOK
	}})
	register(command{name: "version", summary: "print the version", run: func(_ []string, stdout, _ io.Writer) int {
		fmt.Fprintf(stdout, "dosecover %s\n", version)
		return exitOK
	}})
}
