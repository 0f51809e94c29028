//go:build cgo

package main

import (
	"bytes"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dosecover/dosemap/sim"
)

// smallCase writes the demo scenario cut to three sonications (about 350
// files, an anatomy series, three thermometry series and an RTSTRUCT) into
// a temporary folder of t and returns the folder.
func smallCase(t *testing.T) string {
	t.Helper()
	s := sim.DemoSession()
	s.Sonications = s.Sonications[:3]
	s.Motion = nil
	dir := t.TempDir()
	if _, err := sim.WriteSession(dir, s); err != nil {
		t.Fatalf("writing the test case: %v", err)
	}
	return dir
}

// cloneCase returns a copy of the case folder src in a new temporary
// folder of t. Files are hard-linked where the file system allows it;
// editDICOM and the other editors replace a file rather than change it,
// so src is never modified through a link.
func cloneCase(t *testing.T, src string) string {
	t.Helper()
	dst := filepath.Join(t.TempDir(), "case")
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		q := filepath.Join(dst, rel)
		if d.IsDir() {
			return os.MkdirAll(q, 0o755)
		}
		if os.Link(p, q) == nil {
			return nil
		}
		data, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(q, data, 0o644)
	})
	if err != nil {
		t.Fatalf("copying the test case: %v", err)
	}
	return dst
}

// filesIn returns the sorted paths of the files in the sub-folder sub of
// the case dir.
func filesIn(t *testing.T, dir, sub string) []string {
	t.Helper()
	ents, err := os.ReadDir(filepath.Join(dir, sub))
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range ents {
		if !e.IsDir() {
			out = append(out, filepath.Join(dir, sub, e.Name()))
		}
	}
	sort.Strings(out)
	return out
}

// replaceFile writes data as a new file at path (unlinking a hard link
// first).
func replaceFile(t *testing.T, path string, data []byte) {
	t.Helper()
	if err := os.Remove(path); err != nil && !os.IsNotExist(err) {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

// editDICOM parses the DICOM file at path with the DICOM library, lets edit
// change its dataset and writes the result in its place.
func editDICOM(t *testing.T, path string, edit func(ds *dicom.Dataset)) {
	t.Helper()
	ds, err := dicom.ParseFile(path, nil, dicom.SkipProcessingPixelDataValue())
	if err != nil {
		t.Fatalf("parsing %s: %v", path, err)
	}
	edit(&ds)
	var buf bytes.Buffer
	if err := dicom.Write(&buf, ds, dicom.SkipVRVerification(), dicom.SkipValueTypeVerification(), dicom.DefaultMissingTransferSyntax()); err != nil {
		t.Fatalf("writing %s: %v", path, err)
	}
	replaceFile(t, path, buf.Bytes())
}

// dropTags returns an edit removing the top-level elements with the given
// tags.
func dropTags(tags ...tag.Tag) func(ds *dicom.Dataset) {
	return func(ds *dicom.Dataset) {
		kept := ds.Elements[:0]
		for _, e := range ds.Elements {
			drop := false
			for _, t := range tags {
				if e.Tag == t {
					drop = true
				}
			}
			if !drop {
				kept = append(kept, e)
			}
		}
		ds.Elements = kept
	}
}

// setStrings returns an edit giving every element with tag t, at any depth,
// the string values vs.
func setStrings(t tag.Tag, vs ...string) func(ds *dicom.Dataset) {
	return func(ds *dicom.Dataset) {
		walkElements(ds.Elements, func(e *dicom.Element) {
			if e.Tag == t {
				v, err := dicom.NewValue(vs)
				if err != nil {
					panic(err) // the test's own values
				}
				e.Value = v
			}
		})
	}
}

// walkElements calls fn for every element of es and of their sequence
// items, depth first.
func walkElements(es []*dicom.Element, fn func(e *dicom.Element)) {
	for _, e := range es {
		fn(e)
		if e.Value == nil || e.Value.ValueType() != dicom.Sequences {
			continue
		}
		items, _ := e.Value.GetValue().([]*dicom.SequenceItemValue)
		for _, it := range items {
			if sub, ok := it.GetValue().([]*dicom.Element); ok {
				walkElements(sub, fn)
			}
		}
	}
}

// runCmd runs the command line args through run and returns the exit code
// and what was written to standard output and standard error.
func runCmd(args ...string) (code int, stdout, stderr string) {
	var o, e bytes.Buffer
	code = run(args, &o, &e)
	return code, o.String(), e.String()
}

// rawMessage reports the fragments of msg that show an error that was not
// explained to the user: a Go panic or runtime error, a Go type name, or a
// bare system-call error of the os package.
func rawMessage(msg string) []string {
	var bad []string
	for _, frag := range []string{
		"panic", "goroutine ", "runtime error", "index out of range", "nil pointer", "invalid memory address",
		"*errors.", "*fs.PathError", "*os.", "%!", "&{", "<nil>",
		"stat /", "open /", "lstat /", "mkdir /", "readdirent",
	} {
		if strings.Contains(msg, frag) {
			bad = append(bad, frag)
		}
	}
	return bad
}
