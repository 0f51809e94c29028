package testkit_test

import (
	"os/exec"
	"strings"
	"testing"
)

// testkit is for tests only: no package of the program depends on it
// (go list -deps without -test lists what the built program links), and
// it depends on the standard library alone, so the tests of any package,
// dosemap's included, can import it without a cycle.
func TestOnlyTestsImportTestkit(t *testing.T) {
	const kit = "dosecover/dosemap/testkit"
	out, err := exec.Command("go", "list", "-f", "{{.ImportPath}} {{join .Deps \" \"}}", "dosecover/...").CombinedOutput()
	if err != nil {
		t.Fatalf("go list dosecover/...: %v\n%s", err, out)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	if len(lines) < 10 {
		t.Fatalf("go list dosecover/... listed %d packages", len(lines))
	}
	for _, l := range lines {
		f := strings.Fields(l)
		for _, d := range f[1:] {
			if d == kit && f[0] != kit {
				t.Errorf("%s depends on %s", f[0], kit)
			}
		}
	}
	out, err = exec.Command("go", "list", "-deps", kit).CombinedOutput()
	if err != nil {
		t.Fatalf("go list -deps %s: %v\n%s", kit, err, out)
	}
	for _, d := range strings.Fields(string(out)) {
		notStd := strings.Contains(strings.SplitN(d, "/", 2)[0], ".") || strings.HasPrefix(d, "dosecover/")
		if d != kit && notStd {
			t.Errorf("%s depends on %s; it may use the standard library only", kit, d)
		}
	}
}
