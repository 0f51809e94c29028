//go:build cgo

package main

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// TestBuildWithoutCgo builds dosecover with CGO_ENABLED=0 (for servers and
// batch clusters without a C compiler), writes the demo case with it and
// analyses it: the JSON must be the one this (cgo) build writes. Without
// arguments that build says the window needs the cgo build and exits 1.
func TestBuildWithoutCgo(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the program")
	}
	gobin, err := exec.LookPath("go")
	if err != nil {
		t.Skip("no go command on PATH")
	}
	bin := filepath.Join(t.TempDir(), "dosecover")
	build := exec.Command(gobin, "build", "-o", bin, ".")
	build.Env = append(os.Environ(), "CGO_ENABLED=0")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("CGO_ENABLED=0 go build: %v\n%s", err, out)
	}
	data := t.TempDir()
	if out, err := exec.Command(bin, "demo", data).CombinedOutput(); err != nil {
		t.Fatalf("demo: %v\n%s", err, out)
	}
	args := []string{"analyze", filepath.Join(data, "demo"), "--trials", "0", "--drift", "mean", "--json", "-"}
	got, err := exec.Command(bin, args...).Output()
	if err != nil {
		t.Fatalf("analyze: %v", err)
	}
	var want, stderr bytes.Buffer
	if code := run(args, &want, &stderr); code != 0 {
		t.Fatalf("analyze in this build: exit %d\n%s", code, stderr.String())
	}
	if !bytes.Contains(got, []byte(`"drift": "mean"`)) {
		t.Errorf("the drift option did not reach the result:\n%.2000s", got)
	}
	gl, wl := strings.Split(string(got), "\n"), strings.Split(want.String(), "\n")
	for n := range max(len(gl), len(wl)) {
		if n >= len(gl) || n >= len(wl) || gl[n] != wl[n] {
			t.Errorf("the build without cgo writes another result from line %d:\n%q\nthis build:\n%q", n+1, gl[min(n, len(gl)-1)], wl[min(n, len(wl)-1)])
			break
		}
	}
	cmd := exec.Command(bin)
	var msg bytes.Buffer
	cmd.Stderr = &msg
	err = cmd.Run()
	if ee, ok := err.(*exec.ExitError); !ok || ee.ExitCode() != 1 || !strings.Contains(msg.String(), "needs the build with cgo") {
		t.Errorf("no arguments: %v, %q; want exit 1 saying the window needs the cgo build", err, msg.String())
	}
}
