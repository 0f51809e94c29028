//go:build cgo

package main

import "dosecover/dosemap/sim"

// The demo case: a synthetic session written by dosemap/sim into the
// user's cache folder at first use.
func init() {
	demoCaseDir = sim.DemoDir
}
