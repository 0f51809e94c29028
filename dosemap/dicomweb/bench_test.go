package dicomweb

import (
	"os"
	"path/filepath"
	"testing"

	"dosecover/dosemap/dicomweb/orthanctest"
)

// BenchmarkRetrieve retrieves the demo study (1 338 files, 17 series) from
// a local Orthanc into an empty folder: the whole study in one request
// (what Retrieve does for an empty folder) against one request per file
// (four at a time). Compare the two ns/op figures (a ratio; the machine
// is shared).
func BenchmarkRetrieve(b *testing.B) {
	_, files := demoCase(b)
	srv := orthanctest.Start(b)
	c, err := New(srv.URL, Options{Auth: srv.Auth()})
	if err != nil {
		b.Fatal(err)
	}
	st := upload(b, c, files)
	for _, mode := range []struct {
		name string
		per  bool
	}{{"study", false}, {"per-file", true}} {
		b.Run(mode.name, func(b *testing.B) {
			root := b.TempDir()
			for i := 0; b.Loop(); i++ {
				dir := filepath.Join(root, "run")
				os.RemoveAll(dir)
				if _, err := c.Retrieve(b.Context(), st.UID, dir, RetrieveOptions{PerInstance: mode.per}); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(len(files)), "files/op")
		})
	}
}
