package dicomio

import (
	"bytes"
	"context"
	"encoding/binary"
	"os"
	"path/filepath"
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
