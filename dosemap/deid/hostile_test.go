package deid

import (
	"bytes"
	"context"
	"encoding/binary"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/suyashkumar/dicom/pkg/tag"

	"dosecover/dosemap/dicomio"
)

// rawEl is one explicit VR little endian element (PS3.5 7.1.2).
func rawEl(group, elem uint16, vr string, v []byte) []byte {
	b := binary.LittleEndian.AppendUint16(nil, group)
	b = binary.LittleEndian.AppendUint16(b, elem)
	b = append(b, vr...)
	switch vr {
	case "OB", "OW", "SQ", "UN", "UT":
		b = append(b, 0, 0)
		b = binary.LittleEndian.AppendUint32(b, uint32(len(v)))
	default:
		b = binary.LittleEndian.AppendUint16(b, uint16(len(v)))
	}
	return append(b, v...)
}

// rawFile returns a Part 10 file (preamble, "DICM", file meta with the
// given transfer syntax) followed by body.
func rawFile(syntax string, body []byte) []byte {
	ts := []byte(syntax)
	if len(ts)%2 == 1 {
		ts = append(ts, 0)
	}
	meta := rawEl(0x0002, 0x0010, "UI", ts)
	b := append(make([]byte, 128), "DICM"...)
	b = append(b, rawEl(0x0002, 0x0000, "UL", binary.LittleEndian.AppendUint32(nil, uint32(len(meta))))...)
	b = append(b, meta...)
	return append(b, body...)
}

// nested returns depth sequences (0008,1115) of undefined length, each in
// the single item of the one above; terminated closes every item and
// sequence with its delimiter (PS3.5 7.5.2).
func nested(depth int, terminated bool) []byte {
	var b bytes.Buffer
	for range depth {
		b.Write([]byte{0x08, 0x00, 0x15, 0x11, 'S', 'Q', 0, 0, 0xFF, 0xFF, 0xFF, 0xFF}) // sequence, undefined length
		b.Write([]byte{0xFE, 0xFF, 0x00, 0xE0, 0xFF, 0xFF, 0xFF, 0xFF})                 // item, undefined length
	}
	if terminated {
		for range depth {
			b.Write([]byte{0xFE, 0xFF, 0x0D, 0xE0, 0, 0, 0, 0}) // item delimiter
			b.Write([]byte{0xFE, 0xFF, 0xDD, 0xE0, 0, 0, 0, 0}) // sequence delimiter
		}
	}
	return b.Bytes()
}

// TestHostileFilesAreSkipped: a folder holding a good file and files built
// to crash or exhaust a de-identifier (sequences nested 10^6 deep, 10^5
// unterminated ones, a deflated data set, pixel data declaring 4 GB in a
// sparse file) is copied: the good file is, each other one is listed with
// a reason in words, within a bounded allocation and leaving no partial
// folder behind.
func TestHostileFilesAreSkipped(t *testing.T) {
	src := t.TempDir()
	writeMR(t, filepath.Join(src, "good.dcm"), make([]byte, 8))
	files := map[string][]byte{
		"deep.dcm":     rawFile(explicit, nested(1_000_000, true)),
		"unterminated": rawFile(explicit, nested(100_000, false)),
		"deflated.dcm": rawFile("1.2.840.10008.1.2.1.99", []byte{0x63, 0x60, 0x60}),
	}
	for name, data := range files {
		if err := os.WriteFile(filepath.Join(src, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	// A good header whose pixel data declare 0xFFFFFFF0 bytes for a 2×2
	// 16-bit image (8 bytes, PS3.5 8.1.1), made that long as a sparse file.
	good, err := os.ReadFile(filepath.Join(src, "good.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	i := bytes.Index(good, []byte{0xE0, 0x7F, 0x10, 0x00, 'O', 'W'})
	if i < 0 {
		t.Fatal("no pixel data in the good file")
	}
	big := append([]byte(nil), good[:i+12]...)
	binary.LittleEndian.PutUint32(big[i+8:], 0xFFFFFFF0)
	bigPath := filepath.Join(src, "big.dcm")
	if err := os.WriteFile(bigPath, big, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Truncate(bigPath, int64(len(big))+0xFFFFFFF0); err != nil {
		t.Skipf("cannot make a sparse file here: %v", err)
	}
	dst := filepath.Join(t.TempDir(), "out")
	var res *Result
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	start := time.Now()
	res, err = Folder(context.Background(), src, dst, Options{Salt: "s"}, nil)
	runtime.ReadMemStats(&after)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Files) != 1 || filepath.Base(res.Files[0].Src) != "good.dcm" {
		t.Errorf("copied %+v, want good.dcm only", res.Files)
	}
	want := map[string]string{
		"deep.dcm":     "sequences nested more than 64 deep",
		"unterminated": "sequences nested more than 64 deep",
		"deflated.dcm": "Deflated Explicit VR Little Endian (1.2.840.10008.1.2.1.99) is not read",
		"big.dcm":      "PixelData (7fe0,0010) declares 4294967280 bytes",
	}
	got := map[string]string{}
	for _, s := range res.Skipped {
		got[filepath.Base(s.Path)] = s.Reason
		if strings.Contains(s.Reason, "http") {
			t.Errorf("%s: reason %q carries a library URL", s.Path, s.Reason)
		}
	}
	for name, sub := range want {
		if !strings.Contains(got[name], sub) {
			t.Errorf("%s: reason %q, want it to say %q", name, got[name], sub)
		}
	}
	// The nested files are 20 and 2 MB; the sparse one 4 GB: reading any
	// of them whole into a tree or into memory would show here.
	if grown := after.TotalAlloc - before.TotalAlloc; grown > 256<<20 {
		t.Errorf("the copy allocated %d MiB", grown>>20)
	}
	if left, _ := filepath.Glob(filepath.Join(filepath.Dir(dst), ".*part*")); len(left) > 0 {
		t.Errorf("partial folders left: %v", left)
	}
	t.Logf("folder of hostile files copied in %v", time.Since(start))
}

// TestLatin1NamesWithoutCharacterSet: names in raw Latin-1 bytes (ISO
// 8859-1, PS3.5 6.1.2.3) without SpecificCharacterSet (0008,0005), which
// are not valid UTF-8, are cleaned out of kept descriptions, whatever the
// ASCII case, without a crash.
func TestLatin1NamesWithoutCharacterSet(t *testing.T) {
	src := t.TempDir()
	name := "M\xdcLLER^J\xd6RG" // MÜLLER^JÖRG in ISO 8859-1
	es := append(header(t, mrClass, mrUID, "MR"),
		el(t, tag.PatientName, []string{name}),
		el(t, tag.PatientID, []string{"\xc9-77"}),
		el(t, tag.SeriesDescription, []string{"thermo m\xdcller \xff\xfe j\xd6rg"}),
		el(t, tag.StudyDescription, []string{"\xdc\xdc\xdc" + "M\xdcLLER"}),
	)
	writeDS(t, filepath.Join(src, "latin1.dcm"), es)
	dst := filepath.Join(t.TempDir(), "out")
	res, err := Folder(context.Background(), src, dst, Options{Salt: "s"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	ds, err := dicomio.ParseFile(res.Files[0].Dst, false)
	if err != nil {
		t.Fatal(err)
	}
	for _, tg := range []tag.Tag{tag.SeriesDescription, tag.StudyDescription} {
		v := str(t, ds.Elements, tg)
		if strings.Contains(strings.ToUpper(v), "M\xdcLLER") || strings.Contains(strings.ToUpper(v), "J\xd6RG") {
			t.Errorf("%v keeps the name: %q", tg, v)
		}
	}
	if v := str(t, ds.Elements, tag.SeriesDescription); v != "thermo XXXXXX \xff\xfe XXXX" {
		t.Errorf("series description %q", v)
	}
}

// TestLegacyDates: an ACR-NEMA date "1997.04.24" (the DA form of earlier
// versions of the standard, PS3.5 6.2) is shifted like YYYYMMDD; a date
// that cannot be read is emptied; neither stops the copy.
func TestLegacyDates(t *testing.T) {
	src := t.TempDir()
	writeMR(t, filepath.Join(src, "a.dcm"), make([]byte, 8))
	ds, err := dicomio.ParseFile(filepath.Join(src, "a.dcm"), true)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range ds.Elements {
		switch e.Tag {
		case tag.StudyDate:
			e.Value = mustValue(t, []string{"1997.04.24"})
		case tag.AcquisitionDate:
			e.Value = mustValue(t, []string{"24th April"})
		}
	}
	writeDS(t, filepath.Join(src, "a.dcm"), ds.Elements)
	dst := filepath.Join(t.TempDir(), "out")
	res, err := Folder(context.Background(), src, dst, Options{Salt: "s", ShiftDays: -10}, nil)
	if err != nil {
		t.Fatal(err)
	}
	out, err := dicomio.ParseFile(res.Files[0].Dst, false)
	if err != nil {
		t.Fatal(err)
	}
	// 1997-04-24 minus 10 days is 1997-04-14 (calendar arithmetic).
	if v := str(t, out.Elements, tag.StudyDate); v != "19970414" {
		t.Errorf("study date %q, want 19970414", v)
	}
	if v := str(t, out.Elements, tag.AcquisitionDate); v != "" {
		t.Errorf("unreadable acquisition date kept as %q, want it emptied", v)
	}
}

// TestSkippedNamesAreBlanked: the listing of files not copied shows their
// paths inside the case with the patient's name blanked out.
func TestSkippedNamesAreBlanked(t *testing.T) {
	src := t.TempDir()
	writeMR(t, filepath.Join(src, "good.dcm"), make([]byte, 8)) // PatientName TESTPERSON^INVENTED
	if err := os.MkdirAll(filepath.Join(src, "TESTPERSON"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(src, "TESTPERSON", "notes_invented.txt"), []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	res, err := Folder(context.Background(), src, filepath.Join(t.TempDir(), "out"), Options{Salt: "s"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Skipped) != 1 || res.Skipped[0].Shown != filepath.Join("XXXXXXXXXX", "notes_XXXXXXXX.txt") {
		t.Errorf("skipped %+v: want the name blanked in Shown", res.Skipped)
	}
}
