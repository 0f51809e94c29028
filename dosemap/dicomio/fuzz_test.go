package dicomio

import (
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"dosecover/dosemap/testkit"
)

// fuzzSeeds adds the pydicom test files (when installed) and a synthetic
// file of our own as seeds.
func fuzzSeeds(f *testing.F, names ...string) {
	if dir := testkit.FindPydicomTestFiles(); dir != "" {
		for _, n := range names {
			if data, err := os.ReadFile(filepath.Join(dir, n)); err == nil {
				f.Add(data)
			}
		}
	}
}

// FuzzReadFile: the per-file reader must never panic, whatever the bytes;
// a file it accepts must decode every frame without panicking; a file the
// direct attribute reader takes must read the same through the library.
func FuzzReadFile(f *testing.F) {
	fuzzSeeds(f, "MR_small.dcm", "MR_small_implicit.dcm", "MR_small_bigendian.dcm", "CT_small.dcm",
		"MR_truncated.dcm", "rtdose.dcm", "no_meta.dcm", "emri_small.dcm", "MR_small_RLE.dcm", "rtstruct.dcm")
	dir := f.TempDir()
	writeEnhanced(f, filepath.Join(dir, "enh"), 2, 2)
	if data, err := os.ReadFile(filepath.Join(dir, "enh")); err == nil {
		f.Add(data)
	}
	f.Add([]byte("not a DICOM file"))
	f.Fuzz(func(t *testing.T, data []byte) {
		fi, err := readBytes("fuzz", data, true)
		if _, ok := fastElems(data, true); ok {
			// The direct attribute reader took the file: the library
			// must give the same result.
			lib, errL := readBytesWith("fuzz", data, true, false)
			if fmt.Sprint(errL) != fmt.Sprint(err) {
				t.Fatalf("direct reader: %v; library: %v", err, errL)
			}
			if !equalNaN(reflect.ValueOf(fi), reflect.ValueOf(lib)) {
				t.Fatalf("direct reader and library differ:\n%+v\n%+v", fi, lib)
			}
		}
		if err != nil {
			if err.Error() == "" {
				t.Fatal("empty reason")
			}
			return
		}
		if fi.IsImage {
			dst := make([]float32, fi.Rows*fi.Cols)
			for n := range fi.Frames {
				fi.decodeFrame(n, dst, 1, 0, nil)
			}
		}
	})
}

// FuzzStructureSet: the RTSTRUCT reader must never panic.
func FuzzStructureSet(f *testing.F) {
	fuzzSeeds(f, "rtstruct.dcm", "rtplan.dcm")
	f.Fuzz(func(t *testing.T, data []byte) {
		ss, info, err := ReadStructureSet("fuzz", data)
		if err == nil && len(ss) != len(info) {
			t.Fatalf("%d structures, %d infos", len(ss), len(info))
		}
	})
}

// FuzzFastAttrs: on mutations of plain images the direct attribute reader
// never panics and, when it takes a file, agrees with the DICOM library
// element by element and on the fileInfo.
func FuzzFastAttrs(f *testing.F) {
	fuzzSeeds(f, "MR_small.dcm", "MR_small_implicit.dcm", "CT_small.dcm", "rtdose.dcm")
	f.Fuzz(func(t *testing.T, data []byte) {
		compareFast(t, "fuzz", data, len(data)%2 == 0)
	})
}
