//go:build cgo

package main

import (
	"fmt"
	"io"

	"dosecover/dosemap/dicomio"
)

// warnInventory prints the reader's warnings about the case (files not
// used, problems found) to w, prefixed with the command's name, so that an
// analysis of an incomplete case does not look complete.
func warnInventory(w io.Writer, cmd string, inv *dicomio.Inventory) {
	if inv == nil {
		return
	}
	for _, l := range inv.Warnings() {
		fmt.Fprintf(w, "dosecover %s: warning: %s\n", cmd, l)
	}
}
