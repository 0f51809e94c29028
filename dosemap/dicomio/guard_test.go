package dicomio

import "testing"

// TestIsDICOM: the start of a file with the Part 10 preamble and "DICM"
// (PS3.10 section 7.1), or of a bare data set whose first element is of
// group 0002 or 0008 in explicit VR (PS3.5 section 7.1.2) or implicit VR
// little endian with a short even length (PS3.5 section 7.1.3), is taken
// for DICOM; anything else is not.
func TestIsDICOM(t *testing.T) {
	preamble := make([]byte, 128, 132)
	for _, c := range []struct {
		name string
		head []byte
		want bool
	}{
		{"preamble and DICM (PS3.10 7.1)", append(preamble, "DICM"...), true},
		{"preamble without DICM", make([]byte, 132), false},
		{"empty", nil, false},
		{"short text", []byte("hello"), false},
		{"PNG signature", []byte("\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR"), false},
		{"explicit LE (0002,0000) UL", []byte{0x02, 0x00, 0x00, 0x00, 'U', 'L', 4, 0, 0, 0, 0, 0}, true},
		{"implicit LE (0008,0016) length 26", []byte{0x08, 0x00, 0x16, 0x00, 26, 0, 0, 0}, true},
		{"implicit LE odd length", []byte{0x08, 0x00, 0x16, 0x00, 27, 0, 0, 0}, false},
		{"group 0010 first", []byte{0x10, 0x00, 0x10, 0x00, 'P', 'N', 4, 0}, false},
	} {
		if got := IsDICOM(c.head); got != c.want {
			t.Errorf("%s: IsDICOM = %v, want %v", c.name, got, c.want)
		}
	}
}
