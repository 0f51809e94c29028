package dicomio

import (
	"context"
	"encoding/binary"
	"os"
	"path/filepath"
	"strings"
	"testing"
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

// TestParserPanicIsAFileError feeds files crafted to make the DICOM
// library (github.com/suyashkumar/dicom v1.1.0) panic: its header reader
// indexes the value of FileMetaInformationGroupLength (0002,0000) without
// checking that it has one, so an empty UL value is an index out of range.
// The reader must recover, skip that file with a reason naming the problem
// and go on with the others.
func TestParserPanicIsAFileError(t *testing.T) {
	ts := []byte("1.2.840.10008.1.2.1\x00")
	cases := []struct {
		name string
		data []byte
		want string
	}{
		{"empty group length", append(append(preamble(), explicitLE(0x0002, 0x0000, "UL", nil)...), explicitLE(0x0002, 0x0010, "UI", ts)...), "malformed DICOM data"},
		{"group length of another type", append(append(preamble(), explicitLE(0x0002, 0x0000, "LO", []byte("ab"))...), explicitLE(0x0002, 0x0010, "UI", ts)...), "group length"},
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
