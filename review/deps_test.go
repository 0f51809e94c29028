package review

import (
	"os/exec"
	"strings"
	"testing"
)

// TestNoGUIBelowApp guards the one-way dependency rule app -> review ->
// dosemap: nothing under dosemap/ or review/ may depend on the GUI toolkit,
// and dosemap may not depend on review.
func TestNoGUIBelowApp(t *testing.T) {
	for _, c := range []struct {
		pkgs      string
		forbidden []string
	}{
		{"dosecover/dosemap/...", []string{"fyne.io/", "dosecover/review", "dosecover/app"}},
		{"dosecover/review/...", []string{"fyne.io/", "dosecover/app"}},
	} {
		out, err := exec.Command("go", "list", "-deps", "-test", c.pkgs).CombinedOutput()
		if err != nil {
			t.Fatalf("go list -deps %s: %v\n%s", c.pkgs, err, out)
		}
		deps := strings.Fields(string(out))
		if len(deps) == 0 {
			t.Fatalf("go list -deps %s listed nothing", c.pkgs)
		}
		for _, d := range deps {
			for _, f := range c.forbidden {
				if strings.HasPrefix(d, f) {
					t.Errorf("%s depends on %s (forbidden prefix %s)", c.pkgs, d, f)
				}
			}
		}
	}
}
