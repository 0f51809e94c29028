// Package locale gives the process a UTF-8 English locale when the
// environment names none (LANG unset, "C" or "POSIX"), before the GUI
// toolkit reads it during its package initialisation. Go initialises
// independent packages in import-path order, and "dosecover/..." sorts
// before "fyne.io/...", so importing this package from main is enough.
package locale

import (
	"os"
	"strings"
)

func init() {
	for _, k := range []string{"LC_ALL", "LC_MESSAGES", "LANG"} {
		v := os.Getenv(k)
		if v == "" {
			continue
		}
		if v == "C" || v == "POSIX" || strings.HasPrefix(v, "C.") {
			os.Setenv(k, "en_US.UTF-8")
			continue
		}
		return // a real locale is set
	}
	if os.Getenv("LANG") == "" {
		os.Setenv("LANG", "en_US.UTF-8")
	}
}
