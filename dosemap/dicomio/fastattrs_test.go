package dicomio

import (
	"context"
	"fmt"
	"io/fs"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"testing"

	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"

	"github.com/suyashkumar/dicom"
)

// libraryElems is the DICOM library's parse of data as readBytes runs it.
func libraryElems(t *testing.T, data []byte, pixels bool) (elems, error) {
	t.Helper()
	opts := []dicom.ParseOption{dicom.AllowMismatchPixelDataLength(), dicom.AllowUnknownSpecificCharacterSet()}
	if pixels {
		opts = append(opts, dicom.SkipProcessingPixelDataValue())
	} else {
		opts = append(opts, dicom.SkipPixelData())
	}
	ds, panicked, err := parse(data, opts)
	if panicked {
		return nil, fmt.Errorf("library panicked: %v", err)
	}
	return elems(ds.Elements), err
}

// compareFast checks one file: the direct reader either declines it or
// gives, for every top-level attribute the reader uses, the element the
// library gives (tag, VR, length and value, items of sequences included),
// and readBytes gives the same fileInfo (or the same error) either way.
// It returns whether the direct reader took the file.
func compareFast(t *testing.T, name string, data []byte, pixels bool) bool {
	t.Helper()
	fast, ok := fastElems(data, pixels)
	if !ok {
		return false
	}
	lib, err := libraryElems(t, data, pixels)
	if err != nil {
		t.Errorf("%s: the direct reader took a file the library refuses (%v)", name, err)
		return true
	}
	// Same elements, in the same order, for the tags kept.
	var want elems
	for _, e := range lib {
		if fastTopLevel[e.Tag] {
			want = append(want, e)
		}
	}
	if len(want) != len(fast) {
		t.Errorf("%s (pixels %v): direct reader kept %d elements, library has %d of those tags", name, pixels, len(fast), len(want))
		return true
	}
	for n := range want {
		if !sameElement(want[n], fast[n]) {
			t.Errorf("%s (pixels %v): element %s differs:\nlibrary %s\ndirect  %s", name, pixels, tagName(want[n].Tag), want[n], fast[n])
		}
	}
	fl, errL := readBytesWith(name, data, pixels, false)
	ff, errF := readBytesWith(name, data, pixels, true)
	if fmt.Sprint(errL) != fmt.Sprint(errF) {
		t.Errorf("%s (pixels %v): error %v with the library, %v direct", name, pixels, errL, errF)
	}
	if !equalNaN(reflect.ValueOf(fl), reflect.ValueOf(ff)) {
		t.Errorf("%s (pixels %v): fileInfo differs:\nlibrary %+v\ndirect  %+v", name, pixels, fl, ff)
	}
	return true
}

// sameElement compares two elements, recursing into sequence items.
func sameElement(a, b *dicom.Element) bool {
	if a.Tag != b.Tag || a.ValueRepresentation != b.ValueRepresentation ||
		a.RawValueRepresentation != b.RawValueRepresentation || a.ValueLength != b.ValueLength ||
		a.Value.ValueType() != b.Value.ValueType() {
		return false
	}
	if a.Value.ValueType() == dicom.Sequences {
		ia := a.Value.GetValue().([]*dicom.SequenceItemValue)
		ib := b.Value.GetValue().([]*dicom.SequenceItemValue)
		if len(ia) != len(ib) {
			return false
		}
		for n := range ia {
			ea := ia[n].GetValue().([]*dicom.Element)
			eb := ib[n].GetValue().([]*dicom.Element)
			if len(ea) != len(eb) {
				return false
			}
			for m := range ea {
				if !sameElement(ea[m], eb[m]) {
					return false
				}
			}
		}
		return true
	}
	return equalNaN(reflect.ValueOf(a.Value.GetValue()), reflect.ValueOf(b.Value.GetValue()))
}

// equalNaN is reflect.DeepEqual except that NaN equals NaN (missing
// positions and frames are NaN) and empty and nil slices are equal.
func equalNaN(a, b reflect.Value) bool {
	if a.IsValid() != b.IsValid() {
		return false
	}
	if !a.IsValid() {
		return true
	}
	if a.Type() != b.Type() {
		return false
	}
	switch a.Kind() {
	case reflect.Float32, reflect.Float64:
		x, y := a.Float(), b.Float()
		return x == y || (math.IsNaN(x) && math.IsNaN(y))
	case reflect.Pointer, reflect.Interface:
		if a.IsNil() || b.IsNil() {
			return a.IsNil() == b.IsNil()
		}
		return equalNaN(a.Elem(), b.Elem())
	case reflect.Slice, reflect.Array:
		if a.Len() != b.Len() {
			return false
		}
		if a.Kind() == reflect.Slice && a.Type().Elem().Kind() == reflect.Uint8 {
			return string(a.Bytes()) == string(b.Bytes())
		}
		for n := 0; n < a.Len(); n++ {
			if !equalNaN(a.Index(n), b.Index(n)) {
				return false
			}
		}
		return true
	case reflect.Struct:
		for n := 0; n < a.NumField(); n++ {
			if !equalNaN(a.Field(n), b.Field(n)) {
				return false
			}
		}
		return true
	case reflect.Map:
		if a.Len() != b.Len() {
			return false
		}
		for _, k := range a.MapKeys() {
			if !equalNaN(a.MapIndex(k), b.MapIndex(k)) {
				return false
			}
		}
		return true
	case reflect.Func, reflect.Chan:
		return a.IsNil() && b.IsNil()
	default:
		// Unexported fields cannot be read through Interface; compare
		// the basic kinds directly.
		switch a.Kind() {
		case reflect.Bool:
			return a.Bool() == b.Bool()
		case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
			return a.Int() == b.Int()
		case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr:
			return a.Uint() == b.Uint()
		case reflect.String:
			return a.String() == b.String()
		case reflect.Complex64, reflect.Complex128:
			return a.Complex() == b.Complex()
		}
		panic("equalNaN: unhandled kind " + a.Kind().String())
	}
}

// TestFastAttrsPydicom: on every file of the pydicom test folder (Debian
// python3-pydicom 2.3.1: images in the three uncompressed syntaxes,
// compressed, deflated, RTSTRUCT, RT dose, enhanced MR, truncated and
// odd files), the direct attribute reader declines the file or agrees with
// the DICOM library on every attribute the reader uses.
func TestFastAttrsPydicom(t *testing.T) {
	dir := testkit.PydicomTestFiles(t)
	taken := map[string]bool{}
	files := 0
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		data, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		files++
		rel, _ := filepath.Rel(dir, p)
		for _, pixels := range []bool{false, true} {
			if compareFast(t, rel, data, pixels) {
				taken[rel] = true
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("direct reader took %d of %d files", len(taken), files)
	// Plain little-endian images must take the direct path (else the test
	// above compares nothing); the others must not.
	for name, want := range map[string]bool{
		"MR_small.dcm": true, "MR_small_implicit.dcm": true, "CT_small.dcm": true,
		"MR_small_bigendian.dcm": false, "MR_small_RLE.dcm": false, "MR_small_jpeg_ls_lossless.dcm": false,
		"rtstruct.dcm": false, "emri_small.dcm": false, "no_meta.dcm": false, "MR_truncated.dcm": false,
		"image_dfl.dcm": false,
	} {
		if _, err := os.Stat(filepath.Join(dir, name)); err != nil {
			continue
		}
		if taken[name] != want {
			t.Errorf("%s: direct reader took it: %v, want %v", name, taken[name], want)
		}
	}
}

// TestFastAttrsDemo: on the files of the simulated demo session (anatomy,
// thermometry phase and magnitude, structures) the direct reader agrees
// with the library file by file, and Scan and Load give the same Inventory
// and Case with it on and off.
func TestFastAttrsDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and reads the demo case twice")
	}
	dir := t.TempDir()
	if _, err := sim.WriteDemo(dir); err != nil {
		t.Fatal(err)
	}
	paths, err := listFiles(dir)
	if err != nil {
		t.Fatal(err)
	}
	taken := 0
	for n, p := range paths {
		data, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		pixels := n%2 == 0 // both modes, half the files each
		if compareFast(t, filepath.Base(p), data, pixels) {
			taken++
		}
	}
	t.Logf("direct reader took %d of %d demo files", taken, len(paths))
	if taken < len(paths)/2 {
		t.Errorf("direct reader took only %d of %d demo files", taken, len(paths))
	}
	defer func(v bool) { fastAttrs = v }(fastAttrs)
	run := func(on bool) (*Inventory, any) {
		fastAttrs = on
		inv, err := Scan(context.Background(), dir, nil)
		if err != nil {
			t.Fatal(err)
		}
		c, inv2, err := Load(context.Background(), dir, LoadOptions{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if !equalNaN(reflect.ValueOf(inv), reflect.ValueOf(inv2)) {
			t.Errorf("fast %v: Scan and Load inventories differ", on)
		}
		return inv, c
	}
	invOff, caseOff := run(false)
	invOn, caseOn := run(true)
	if !reflect.DeepEqual(invOff, invOn) {
		t.Errorf("Inventory differs with the direct reader:\nlibrary %+v\ndirect  %+v", invOff, invOn)
	}
	if !equalNaN(reflect.ValueOf(caseOff), reflect.ValueOf(caseOn)) {
		t.Errorf("Case differs with the direct reader")
	}
	if !invOn.Reviewable {
		t.Errorf("demo not reviewable: %s", invOn.NotReviewable)
	}
}

// TestFastAttrsCorrupt: every truncation of a plain image file and seeded
// random byte changes to it are declined or read as the library reads
// them, without a panic.
func TestFastAttrsCorrupt(t *testing.T) {
	base := map[string][]byte{}
	for _, name := range []string{"MR_small.dcm", "MR_small_implicit.dcm"} {
		data, err := os.ReadFile(pydicomFile(t, name))
		if err != nil {
			t.Fatal(err)
		}
		base[name] = data
	}
	rng := rand.New(rand.NewPCG(7, 11))
	for name, data := range base {
		for n := 0; n <= len(data); n += 1 + n/64 {
			compareFast(t, fmt.Sprintf("%s[:%d]", name, n), data[:n], n%2 == 0)
		}
		taken := 0
		for n := 0; n < 3000; n++ {
			mut := append([]byte(nil), data...)
			// Change 1-4 bytes in the header part (before the pixel data).
			for k := 0; k < 1+rng.IntN(4); k++ {
				mut[132+rng.IntN(min(len(mut), 1200)-132)] = byte(rng.IntN(256))
			}
			if compareFast(t, fmt.Sprintf("%s mutation %d", name, n), mut, n%2 == 0) {
				taken++
			}
		}
		t.Logf("%s: direct reader took %d of 3000 mutations", name, taken)
	}
}

// TestLibraryStringsASCII checks the ASCII path of libraryStrings against
// libraryStringsUTF8, the step-by-step form of the library's splitting
// (trim spaces and NULs unless only white space, split at backslashes),
// on seeded values built from spaces, NULs, backslashes, control
// characters and letters, and a few by hand: equal string lists.
func TestLibraryStringsASCII(t *testing.T) {
	cases := []string{"", " ", "  \t", "\x00", "A", " A ", "A\\B", "A\\", "\\", "\\\\", " 1.5\\2.5 \x00", "\t\n", "\x00A\x00"}
	rng := rand.New(rand.NewPCG(51, 52))
	alphabet := []byte{' ', 0, '\\', '\t', '\n', '\r', '\v', '\f', 'A', 'z', '1', '.', '-'}
	for range 3000 {
		b := make([]byte, rng.IntN(12))
		for i := range b {
			b[i] = alphabet[rng.IntN(len(alphabet))]
		}
		cases = append(cases, string(b))
	}
	for _, c := range cases {
		got, want := libraryStrings([]byte(c)), libraryStringsUTF8([]byte(c))
		if !slices.Equal(got, want) {
			t.Fatalf("%q: %q, want %q", c, got, want)
		}
	}
}
