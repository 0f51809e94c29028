package dicomio

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"testing"
)

// TestReadPixelsMatchesParse checks the pixel pass of Load, which reads
// only the pixel bytes located by the attribute pass, against a full parse
// of each file by the DICOM library (the reference), for little- and
// big-endian, signed 12-bit and unsigned 16-bit files; and that a file
// rewritten between the two passes is reported as changed.
func TestReadPixelsMatchesParse(t *testing.T) {
	for _, c := range []struct {
		name        string
		big, signed bool
	}{{"u16", false, false}, {"s12", false, true}, {"big endian", true, false}} {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			mrSpec{Dir: dir, SeriesUID: "2.25.77", Desc: "phase", FoR: testFoR, Number: 1, Cols: 5, Rows: 3, Slices: 2, Times: 2,
				Spacing: 1.5, SliceGap: 3, Components: []string{"P"}, StartSec: 3600, DT: 2, TPI: true, B0: 3, TE: 12,
				Signed12: c.signed, Big: c.big,
				Value: func(_ string, i, j, k, tt int) int { return (i*37 + j*11 + k*5 + tt) % 2000 }}.write(t)
			paths, err := listFiles(dir)
			if err != nil || len(paths) == 0 {
				t.Fatalf("%d files, %v", len(paths), err)
			}
			for _, p := range paths {
				fi, err := readFile(p, false)
				if err != nil {
					t.Fatal(err)
				}
				if fi.pixelAt.Header == nil {
					t.Fatalf("%s: pixel data not located", filepath.Base(p))
				}
				got, err := readPixels(fi)
				if err != nil {
					t.Fatal(err)
				}
				want, err := readFile(p, true)
				if err != nil {
					t.Fatal(err)
				}
				if !bytes.Equal(got.Pixels, want.Pixels) {
					t.Errorf("%s: pixel bytes differ from the full parse", filepath.Base(p))
				}
			}
			// Rewritten with another length: changed.
			fi, _ := readFile(paths[0], false)
			data, _ := os.ReadFile(paths[0])
			if err := os.WriteFile(paths[0], append(data, 0, 0), 0o644); err != nil {
				t.Fatal(err)
			}
			if _, err := readPixels(fi); !errors.Is(err, errChanged) {
				t.Errorf("file grown: %v, want %v", err, errChanged)
			}
			// Same length, element header overwritten: changed.
			bad := bytes.Clone(data)
			bad[fi.pixelAt.Offset-1] ^= 0xFF
			if err := os.WriteFile(paths[0], bad, 0o644); err != nil {
				t.Fatal(err)
			}
			if _, err := readPixels(fi); !errors.Is(err, errChanged) {
				t.Errorf("header changed: %v, want %v", err, errChanged)
			}
		})
	}
}
