// The archive round trips do not depend on the vector kernels: they run
// once, in the pass without the purego tag.

//go:build !purego

package dicomweb

import (
	"os"
	"path/filepath"
	"sort"
	"testing"

	"dosecover/dosemap/dicomweb/orthanctest"
	"dosecover/dosemap/sim"
)

// BenchmarkRetrieve retrieves a study from a local Orthanc into an empty
// folder: the whole study in one request (what Retrieve does for an empty
// folder) against one request per file (four at a time). Studies: the demo
// (1 337 files, pydicom-written) and the typical session of the simulator
// (4 053 files: 24 sonications × 14 frames × 6 slices, phase and
// magnitude, plus anatomy and structures). Compare the ns/op of the two
// modes (a ratio; the machine is shared).
func BenchmarkRetrieve(b *testing.B) {
	srv := orthanctest.Start(b)
	c, err := New(srv.URL, Options{Auth: srv.Auth()})
	if err != nil {
		b.Fatal(err)
	}
	_, demoFiles := demoCase(b)
	studies := []struct {
		name  string
		files func() [][]byte
	}{
		{"demo", func() [][]byte { return demoFiles }},
		{"typical", func() [][]byte { return typicalFiles(b) }},
	}
	for _, s := range studies {
		b.Run(s.name, func(b *testing.B) {
			files := s.files()
			st := uploadFor(b, c, files)
			for _, mode := range []struct {
				name string
				per  bool
			}{{"study", false}, {"per-file", true}} {
				b.Run(mode.name, func(b *testing.B) {
					root := b.TempDir()
					for b.Loop() {
						dir := filepath.Join(root, "run")
						os.RemoveAll(dir)
						if _, err := c.Retrieve(b.Context(), st, dir, RetrieveOptions{PerInstance: mode.per}); err != nil {
							b.Fatal(err)
						}
					}
					b.ReportMetric(float64(len(files)), "files/op")
				})
			}
		})
	}
}

// uploadFor stores files and returns the study UID of the first one's
// study (found through its SOP Instance UID's listing).
func uploadFor(b *testing.B, c *Client, files [][]byte) string {
	b.Helper()
	for i := 0; i < len(files); i += 200 {
		if err := c.Store(b.Context(), "", files[i:min(i+200, len(files))]); err != nil {
			b.Fatal(err)
		}
	}
	found, err := c.FindStudies(b.Context(), Query{})
	if err != nil {
		b.Fatal(err)
	}
	for _, s := range found {
		if s.Instances == len(files) {
			return s.UID
		}
	}
	b.Fatalf("no study of %d instances among %+v", len(files), found)
	return ""
}

// typicalFiles writes the simulator's typical session and returns its
// DICOM files.
func typicalFiles(b *testing.B) [][]byte {
	b.Helper()
	dir := b.TempDir()
	if _, err := sim.WriteTypical(dir, 1); err != nil {
		b.Fatal(err)
	}
	var paths []string
	filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err == nil && !d.IsDir() && filepath.Ext(p) == ".dcm" {
			paths = append(paths, p)
		}
		return nil
	})
	sort.Strings(paths)
	var files [][]byte
	for _, p := range paths {
		data, err := os.ReadFile(p)
		if err != nil {
			b.Fatal(err)
		}
		files = append(files, data)
	}
	return files
}
