package deid

import (
	"context"
	"encoding/binary"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// crashingDICOM returns a file on which the DICOM library
// (github.com/suyashkumar/dicom v1.1.0) panics: a file meta information
// with an empty TransferSyntaxUID (0002,0010).
func crashingDICOM() []byte {
	el := func(group, elem uint16, vr string, v []byte) []byte {
		b := binary.LittleEndian.AppendUint16(nil, group)
		b = binary.LittleEndian.AppendUint16(b, elem)
		b = append(b, vr...)
		b = binary.LittleEndian.AppendUint16(b, uint16(len(v)))
		return append(b, v...)
	}
	ts := el(0x0002, 0x0010, "UI", nil)
	b := append(make([]byte, 128), "DICM"...)
	b = append(b, el(0x0002, 0x0000, "UL", binary.LittleEndian.AppendUint32(nil, uint32(len(ts))))...)
	b = append(b, ts...)
	return append(b, el(0x0008, 0x0060, "CS", []byte("MR"))...)
}

// TestFolderSkipsBadFiles: files that are empty, not DICOM, truncated or
// crash the DICOM library are not copied, each with a reason in words (no
// text of the library or of the Go runtime), and the good file is.
func TestFolderSkipsBadFiles(t *testing.T) {
	src := t.TempDir()
	writeMR(t, filepath.Join(src, "good.dcm"), make([]byte, 8))
	good, err := os.ReadFile(filepath.Join(src, "good.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]string{
		"empty.dcm":     "empty file",
		"notes.txt":     "not a DICOM file (no DICM marker and no DICOM element at the start)",
		"truncated.dcm": "truncated or corrupt: FileMetaInformationGroupLength (0002,0000) declares 96 bytes but only 56 remain",
		"crash.dcm":     "unreadable: malformed DICOM data the parser cannot read (it stopped on an internal check)",
	}
	files := map[string][]byte{"empty.dcm": nil, "notes.txt": []byte("treatment notes"), "truncated.dcm": good[:200], "crash.dcm": crashingDICOM()}
	for name, data := range files {
		if err := os.WriteFile(filepath.Join(src, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	res, err := Folder(context.Background(), src, filepath.Join(t.TempDir(), "out"), Options{Salt: "s"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Files) != 1 {
		t.Errorf("%d files copied, want 1", len(res.Files))
	}
	got := map[string]string{}
	for _, s := range res.Skipped {
		got[filepath.Base(s.Path)] = s.Reason
		for _, raw := range []string{"runtime error", "nil pointer", "readElement", "EOF", "buffer"} {
			if strings.Contains(s.Reason, raw) {
				t.Errorf("%s: reason %q shows library text %q", s.Path, s.Reason, raw)
			}
		}
	}
	for name, reason := range want {
		if got[name] != reason {
			t.Errorf("%s: reason %q, want %q", name, got[name], reason)
		}
	}
}
