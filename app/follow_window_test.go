//go:build cgo

package main

import (
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"fyne.io/fyne/v2"

	"dosecover/dosemap/sim"
)

// copyTree copies the files of src whose path relative to src passes keep
// into dst.
func copyTree(t *testing.T, src, dst string, keep func(rel string) bool) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		if !keep(rel) {
			return nil
		}
		data, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		out := filepath.Join(dst, rel)
		os.MkdirAll(filepath.Dir(out), 0o755)
		tmp := filepath.Join(filepath.Dir(out), "."+filepath.Base(out)+".part")
		if err := os.WriteFile(tmp, data, 0o644); err != nil {
			return err
		}
		return os.Rename(tmp, out)
	})
	if err != nil {
		t.Fatal(err)
	}
}

// TestFollowFolderUpdatesWindow: File ▸ Follow folder… shows the first
// complete sonication, and the next one updates the sonication table and
// metrics while the slice and the selected sonication stay.
func TestFollowFolderUpdatesWindow(t *testing.T) {
	src := filepath.Join(t.TempDir(), "src")
	s := sim.DemoSession()
	s.Sonications = s.Sonications[:2]
	s.Motion = nil
	if _, err := sim.WriteSession(src, s); err != nil {
		t.Fatal(err)
	}
	live := filepath.Join(t.TempDir(), "live")
	copyTree(t, src, live, func(rel string) bool { return !strings.HasPrefix(rel, "sonication-02") })
	rw := testWindow(t)
	rw.settings.Trials = 0
	state := func() (n, rows, slice, selected int, status string) {
		fyne.DoAndWait(func() {
			if rw.follow != nil {
				n = rw.follow.n
			}
			rows, _ = rw.sonTable.Length()
			slice, selected, status = rw.viewers[0].slice, rw.selected, rw.status.Text
		})
		return
	}
	wait := func(want int) {
		t.Helper()
		deadline := time.Now().Add(90 * time.Second)
		for {
			// The status line is written last in an update (the test
			// driver runs fyne.Do on the calling goroutine).
			n, _, _, _, status := state()
			if n >= want && strings.Contains(status, fmt.Sprintf("%d sonications analysed", want)) {
				return
			}
			if time.Now().After(deadline) {
				t.Fatalf("%d sonications shown after 90 s, want %d (status %q)", n, want, status)
			}
			time.Sleep(20 * time.Millisecond)
		}
	}
	fyne.DoAndWait(func() { rw.followFolder(live) })
	defer fyne.DoAndWait(func() { rw.stopFollowing(false) })
	wait(1)
	_, rows, _, _, status := state()
	if rows != 1 || !strings.Contains(status, "1 sonications analysed") {
		t.Errorf("after the first sonication: %d rows, status %q", rows, status)
	}
	fyne.DoAndWait(func() {
		rw.sliders[0].SetValue(3)
		rw.selectSonication(0)
	})
	copyTree(t, src, live, func(rel string) bool { return strings.HasPrefix(rel, "sonication-02") })
	wait(2)
	_, rows, slice, selected, status := state()
	if rows != 2 {
		t.Errorf("after the second sonication: %d rows, want 2", rows)
	}
	if slice != 3 || selected != 0 {
		t.Errorf("slice %d and selection %d after the update, want 3 and 0 kept", slice, selected)
	}
	if !strings.Contains(status, "2 sonications analysed; last update") {
		t.Errorf("status %q does not tell the sonications and the time of the update", status)
	}
}
