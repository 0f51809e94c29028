//go:build cgo

package main

import (
	"fmt"
	"os"
	"runtime/pprof"
	"time"

	"fyne.io/fyne/v2"
)

// launched is when the process started, for the timing log.
var launched = time.Now()

// timingMode is DOSECOVER_TIMING: "1" prints on standard error when each
// stage of opening a case ends (seconds since launch); "exit" also quits
// once the analysed case is on screen and the peak temperature is ready,
// for timed runs of the window (DEVELOPERS.md).
var timingMode = os.Getenv("DOSECOVER_TIMING")

// With DOSECOVER_TIMING set, DOSECOVER_CPUPROFILE names a file for a CPU
// profile (runtime/pprof) of the run up to the end of the timed run.
var profile *os.File

func init() {
	if name := os.Getenv("DOSECOVER_CPUPROFILE"); timingMode != "" && name != "" {
		f, err := os.Create(name)
		if err == nil && pprof.StartCPUProfile(f) == nil {
			profile = f
		}
	}
}

// stage notes the end of a stage of opening a case in the timing log.
func stage(what string) {
	if timingMode == "" {
		return
	}
	fmt.Fprintf(os.Stderr, "dosecover timing: %6.2f s  %s\n", time.Since(launched).Seconds(), what)
}

// timingDone ends a timed run (DOSECOVER_TIMING=exit).
func timingDone() {
	if timingMode == "exit" {
		stage("done")
		if profile != nil {
			pprof.StopCPUProfile()
			profile.Close()
		}
		fyne.Do(func() { fyne.CurrentApp().Quit() })
	}
}
