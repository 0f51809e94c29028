package dicomio

import (
	"bytes"
	"context"
	"encoding/binary"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/suyashkumar/dicom"
)

// explicitLE encodes one explicit-VR little-endian element with a 16-bit
// length (PS3.5 7.1.2).
func explicitLE(group, elem uint16, vr string, value []byte) []byte {
	b := binary.LittleEndian.AppendUint16(nil, group)
	b = binary.LittleEndian.AppendUint16(b, elem)
	b = append(b, vr...)
	b = binary.LittleEndian.AppendUint16(b, uint16(len(value)))
	return append(b, value...)
}

// preamble returns the 128-byte preamble and the DICM prefix (PS3.10 7.1).
func preamble() []byte { return append(make([]byte, 128), "DICM"...) }

// crashingFile returns a file that makes the DICOM library
// (github.com/suyashkumar/dicom v1.1.0) panic with a nil pointer
// dereference: a file meta information whose TransferSyntaxUID (0002,0010)
// is empty, followed by one data element.
func crashingFile() []byte {
	ts := explicitLE(0x0002, 0x0010, "UI", nil)
	b := append(preamble(), explicitLE(0x0002, 0x0000, "UL", binary.LittleEndian.AppendUint32(nil, uint32(len(ts))))...)
	b = append(b, ts...)
	return append(b, explicitLE(0x0008, 0x0060, "CS", []byte("MR"))...)
}

// TestParserPanicIsAFileError feeds files crafted to make the DICOM library
// fail: crashingFile makes it panic (checked here first, so the test shows
// when a later library no longer does), and a group length of the wrong
// type it reports as an error. The reader must recover, skip the file with
// a reason naming the problem in plain words (no Go runtime text) and go
// on with the others.
func TestParserPanicIsAFileError(t *testing.T) {
	ts := []byte("1.2.840.10008.1.2.1\x00")
	func() {
		defer func() {
			if r := recover(); r == nil {
				t.Error("the DICOM library no longer panics on crashingFile; find another crafted input")
			}
		}()
		d := crashingFile()
		dicom.Parse(bytes.NewReader(d), int64(len(d)), nil, dicom.SkipPixelData())
	}()
	cases := []struct {
		name string
		data []byte
		want string
	}{
		{"empty transfer syntax", crashingFile(), "malformed DICOM data"},
		{"group length of another type", append(append(preamble(), explicitLE(0x0002, 0x0000, "LO", []byte("ab"))...), explicitLE(0x0002, 0x0010, "UI", ts)...), "FileMetaInformationGroupLength"},
	}
	dir := t.TempDir()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			fi, err := readBytes(c.name, c.data, false)
			if err == nil {
				t.Fatalf("accepted: %+v", fi)
			}
			t.Logf("reason: %v", err)
			if _, ok := err.(*fileError); !ok {
				t.Errorf("error %T %v is not a per-file reason", err, err)
			}
			if c.want != "" && !strings.Contains(err.Error(), c.want) {
				t.Errorf("reason %q lacks %q", err, c.want)
			}
			for _, raw := range []string{"runtime error", "nil pointer", "index out of range", "goroutine"} {
				if strings.Contains(err.Error(), raw) {
					t.Errorf("reason %q shows the Go runtime's text %q", err, raw)
				}
			}
			if err := os.WriteFile(filepath.Join(dir, strings.ReplaceAll(c.name, " ", "-")+".dcm"), c.data, 0o644); err != nil {
				t.Fatal(err)
			}
		})
	}
	// Through Scan: every crafted file is listed as skipped, with its name.
	inv, err := Scan(context.Background(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(inv.Skipped) != len(cases) {
		t.Fatalf("%d files skipped, want %d: %+v", len(inv.Skipped), len(cases), inv.Skipped)
	}
	for _, s := range inv.Skipped {
		if !strings.HasSuffix(s.Path, ".dcm") || s.Reason == "" {
			t.Errorf("skipped file %+v: no name or no reason", s)
		}
	}
}

// TestUnreadableFileIsSkipped: a file the user may not read is listed as
// skipped with the reason, and the rest of the folder is read. A process
// running as root reads it anyway, so the test skips there.
func TestUnreadableFileIsSkipped(t *testing.T) {
	if os.Geteuid() == 0 {
		t.Skip("running as root: file permissions do not stop reading")
	}
	dir := t.TempDir()
	p := filepath.Join(dir, "locked.dcm")
	if err := os.WriteFile(p, crashingFile(), 0o000); err != nil {
		t.Fatal(err)
	}
	inv, err := Scan(context.Background(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(inv.Skipped) != 1 || inv.Skipped[0].Path != "locked.dcm" || inv.Skipped[0].Reason != "cannot read: permission denied" {
		t.Errorf("skipped %+v, want locked.dcm: cannot read: permission denied", inv.Skipped)
	}
}

// TestUnreadableFolderIsListed: a sub-folder the user may not read is
// listed among the skipped entries with the reason (not silently left
// out). Skipped when running as root, which reads it anyway.
func TestUnreadableFolderIsListed(t *testing.T) {
	if os.Geteuid() == 0 {
		t.Skip("running as root: folder permissions do not stop reading")
	}
	dir := t.TempDir()
	sub := filepath.Join(dir, "series2")
	if err := os.Mkdir(sub, 0o755); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(sub, "x.dcm"), crashingFile(), 0o644)
	if err := os.Chmod(sub, 0o000); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { os.Chmod(sub, 0o755) })
	inv, err := Scan(context.Background(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := "series2" + string(filepath.Separator)
	if len(inv.Skipped) != 1 || inv.Skipped[0].Path != want || !strings.Contains(inv.Skipped[0].Reason, "permission denied") {
		t.Errorf("skipped %+v, want %s with permission denied", inv.Skipped, want)
	}
}

// TestInventoryWarnings: skipped DICOM files are summarised with the first
// reasons, files that are not DICOM only counted, problems passed on.
func TestInventoryWarnings(t *testing.T) {
	for _, c := range []struct {
		name string
		inv  Inventory
		want []string
	}{
		{"clean", Inventory{Dir: "c", Skipped: []SkippedFile{{"notes.txt", "not a DICOM file (no DICM marker)"}}}, nil},
		{"one file", Inventory{Dir: "c", Skipped: []SkippedFile{{"a/1.dcm", "missing tag PixelSpacing (0028,0030)"}}},
			[]string{"1 files of c were not used: a/1.dcm: missing tag PixelSpacing (0028,0030)"}},
		{"many files and a problem", Inventory{Dir: "c", Problems: []string{"frame of reference mismatch"}, Skipped: []SkippedFile{
			{"1.dcm", "r1"}, {"2.dcm", "r2"}, {"x.txt", "not a DICOM file"}, {"3.dcm", "r3"}, {"4.dcm", "r4"}}},
			[]string{"4 files of c were not used: 1.dcm: r1; 2.dcm: r2; 3.dcm: r3; and 1 more (dosecover inspect lists them all) (1 other files are not DICOM)", "frame of reference mismatch"}},
	} {
		got := c.inv.Warnings()
		if strings.Join(got, "|") != strings.Join(c.want, "|") {
			t.Errorf("%s:\n got %q\nwant %q", c.name, got, c.want)
		}
	}
}

// TestLargeNonDICOMFileIsNotRead: a large file that is not DICOM (here a
// sparse 3 GiB file of zeros, which takes no disk space) is skipped from
// its first bytes; reading it whole would need 3 GiB of memory.
func TestLargeNonDICOMFileIsNotRead(t *testing.T) {
	dir := t.TempDir()
	f, err := os.Create(filepath.Join(dir, "recording.mp4"))
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Truncate(3 << 30); err != nil {
		f.Close()
		t.Skipf("cannot make a sparse file here: %v", err)
	}
	f.Close()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	inv, err := Scan(context.Background(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	runtime.ReadMemStats(&after)
	if len(inv.Skipped) != 1 || !strings.HasPrefix(inv.Skipped[0].Reason, "not a DICOM file") {
		t.Errorf("skipped %+v", inv.Skipped)
	}
	if grown := after.TotalAlloc - before.TotalAlloc; grown > 64<<20 {
		t.Errorf("scanning allocated %d MiB for one non-DICOM file", grown>>20)
	}
}
