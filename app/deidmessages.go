package main

import (
	"io"
	"io/fs"
	"path/filepath"
	"sort"
	"strings"

	"dosecover/review/audit"
)

// pathHider passes messages on with the paths of one case folder hidden:
// in a de-identified run the folder's own path and the names of the
// folders and files in it may carry the patient's name (audit.HidePaths:
// files by number, subfolders as "a folder of the case").
type pathHider struct {
	w     io.Writer
	given string // the folder as the user gave it
	c     audit.Case
}

// hidePathsOf returns a writer that hides the paths of the case folder dir
// in everything written to w. A folder that cannot be listed hides only
// its own path.
func hidePathsOf(w io.Writer, dir string) io.Writer {
	h := &pathHider{w: w, given: filepath.Clean(dir), c: audit.Case{ID: "the case folder"}}
	if abs, err := filepath.Abs(dir); err == nil {
		h.c.Dir = abs
	}
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return nil
		}
		if rel, err := filepath.Rel(dir, p); err == nil {
			h.c.Files = append(h.c.Files, filepath.ToSlash(rel))
		}
		return nil
	})
	sort.Strings(h.c.Files)
	return h
}

// Write hides the paths in p and writes the result; it reports len(p)
// written when the underlying write succeeds.
func (h *pathHider) Write(p []byte) (int, error) {
	s := audit.HidePaths(string(p), &h.c)
	if h.given != "." && h.given != "" {
		s = strings.ReplaceAll(s, h.given, h.c.ID)
	}
	if _, err := io.WriteString(h.w, s); err != nil {
		return 0, err
	}
	return len(p), nil
}
