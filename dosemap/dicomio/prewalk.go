package dicomio

import (
	"bytes"
	"encoding/binary"
	"fmt"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// The DICOM library allocates every value's buffer from its declared length
// before checking that the file holds that many bytes, so one corrupt
// length can ask for gigabytes. checkLengths walks the element headers
// first (without decoding values) and rejects a file whose declared lengths
// do not fit in the file or in the enclosing sequence or item.

// longVR are the explicit VRs with a 2-byte reserved field and a 4-byte
// length (PS3.5 7.1.2).
var longVR = map[string]bool{"OB": true, "OD": true, "OF": true, "OL": true, "OV": true, "OW": true,
	"SQ": true, "SV": true, "UC": true, "UN": true, "UR": true, "UT": true, "UV": true}

const undefinedLength = 0xFFFFFFFF

// lengthError is a declared length that does not fit.
type lengthError struct{ msg string }

func (e *lengthError) Error() string { return e.msg }

type walker struct {
	data     []byte
	explicit bool
	bo       binary.ByteOrder
	syntax   string
	pixel    pixelLocation
}

// pixelLocation is where a file's native (not encapsulated) top-level
// PixelData value lies: Header is the element header, the Length value
// bytes start at Offset. The zero value: none found.
type pixelLocation struct {
	Header []byte
	Offset int
	Length int
}

// checkLengths returns nil when every element length fits, else an error
// naming the element. It also reports the transfer syntax found in the file
// meta information ("" when absent).
func checkLengths(data []byte) (syntax string, err error) {
	syntax, _, err = checkLayout(data)
	return syntax, err
}

// checkLayout is checkLengths that also returns the location of the
// native top-level pixel data, so that a later pass can read the pixels
// without parsing the file again.
func checkLayout(data []byte) (syntax string, px pixelLocation, err error) {
	pos := 0
	if len(data) >= 132 && string(data[128:132]) == "DICM" {
		pos = 132
	}
	w := &walker{data: data, explicit: true, bo: binary.LittleEndian}
	// File meta information: group 0002, explicit VR little endian.
	for pos+8 <= len(data) && binary.LittleEndian.Uint16(data[pos:]) == 0x0002 {
		next, t, val, err := w.header(pos, len(data))
		if err != nil {
			return "", pixelLocation{}, err
		}
		if t == tag.TransferSyntaxUID {
			w.syntax = trimUID(val)
		}
		pos = next
	}
	switch w.syntax {
	case "1.2.840.10008.1.2":
		w.explicit = false
	case "1.2.840.10008.1.2.2":
		w.bo = binary.BigEndian
	case "":
		// No meta information: guess byte order and VR style from the
		// first element.
		if pos+6 <= len(data) && binary.LittleEndian.Uint16(data[pos:]) != 0x0008 && binary.BigEndian.Uint16(data[pos:]) == 0x0008 {
			w.bo = binary.BigEndian
		}
		if pos+6 <= len(data) {
			c0, c1 := data[pos+4], data[pos+5]
			w.explicit = c0 >= 'A' && c0 <= 'Z' && c1 >= 'A' && c1 <= 'Z'
		}
	default:
		if ts, ok := transferSyntaxes[w.syntax]; ok && !ts.supported && w.syntax == "1.2.840.10008.1.2.1.99" {
			return w.syntax, pixelLocation{}, nil // deflated: the body cannot be walked
		}
	}
	_, err = w.elements(pos, len(data), false, 0)
	if err != nil {
		return w.syntax, pixelLocation{}, err
	}
	return w.syntax, w.pixel, nil
}

func trimUID(b []byte) string {
	for len(b) > 0 && (b[len(b)-1] == 0 || b[len(b)-1] == ' ') {
		b = b[:len(b)-1]
	}
	return string(b)
}

// header reads the element header at pos and returns the position after
// its value (for defined lengths), the tag and the value bytes.
func (w *walker) header(pos, end int) (next int, t tag.Tag, val []byte, err error) {
	n, t, vr, vl, err := w.readHeader(pos, end)
	if err != nil {
		return 0, t, nil, err
	}
	if vl == undefinedLength {
		return 0, t, nil, fmt.Errorf("%s in the file meta information has undefined length", tagName(t))
	}
	_ = vr
	return n + int(vl), t, w.data[n : n+int(vl)], nil
}

// readHeader decodes one element header: the position of its value, tag,
// VR ("" when implicit) and length; defined lengths are checked against end.
func (w *walker) readHeader(pos, end int) (valPos int, t tag.Tag, vr string, vl uint32, err error) {
	if pos+8 > end {
		return 0, t, "", 0, fmt.Errorf("element header at byte %d cut short", pos)
	}
	bo := w.bo
	if pos < len(w.data) && w.metaGroup(pos) {
		bo = binary.LittleEndian
	}
	t = tag.Tag{Group: bo.Uint16(w.data[pos:]), Element: bo.Uint16(w.data[pos+2:])}
	explicit := w.explicit || t.Group == 0x0002
	switch {
	case t.Group == 0xFFFE: // item and delimiters: always tag + 4-byte length
		vl = bo.Uint32(w.data[pos+4:])
		valPos = pos + 8
	case explicit:
		vr = string(w.data[pos+4 : pos+6])
		if longVR[vr] {
			if pos+12 > end {
				return 0, t, vr, 0, fmt.Errorf("header of %s cut short", tagName(t))
			}
			vl = bo.Uint32(w.data[pos+8:])
			valPos = pos + 12
		} else {
			vl = uint32(bo.Uint16(w.data[pos+6:]))
			valPos = pos + 8
		}
	default:
		vl = bo.Uint32(w.data[pos+4:])
		valPos = pos + 8
	}
	if vl != undefinedLength && int64(valPos)+int64(vl) > int64(end) {
		return 0, t, vr, vl, &lengthError{fmt.Sprintf("%s declares %d bytes but only %d remain", tagName(t), vl, end-valPos)}
	}
	return valPos, t, vr, vl, nil
}

func (w *walker) metaGroup(pos int) bool {
	return binary.LittleEndian.Uint16(w.data[pos:]) == 0x0002
}

// isSequence reports whether the element is a sequence: VR SQ, or, in
// implicit VR, a tag the dictionary knows as SQ.
func isSequence(t tag.Tag, vr string, explicit bool) bool {
	if explicit {
		return vr == "SQ"
	}
	if info, err := tag.Find(t); err == nil {
		for _, v := range info.VRs {
			if v == "SQ" {
				return true
			}
		}
	}
	return false
}

// elements walks the elements in [pos, end). inUndefined says the list
// ends with a delimiter (item or sequence of undefined length); the
// position after the delimiter is returned.
func (w *walker) elements(pos, end int, inUndefined bool, depth int) (int, error) {
	if depth > 64 {
		return 0, fmt.Errorf("sequences nested more than 64 deep")
	}
	for pos < end {
		if end-pos < 8 {
			if inUndefined {
				return 0, fmt.Errorf("item cut short at byte %d", pos)
			}
			return end, nil // trailing padding
		}
		valPos, t, vr, vl, err := w.readHeader(pos, end)
		if err != nil {
			return 0, err
		}
		switch {
		case t == tag.ItemDelimitationItem || t == tag.SequenceDelimitationItem:
			if inUndefined {
				return valPos, nil
			}
			pos = valPos
			continue
		case t == tag.Item:
			// A stray item at this level: step over its content.
			if vl == undefinedLength {
				if pos, err = w.elements(valPos, end, true, depth+1); err != nil {
					return 0, err
				}
				continue
			}
			pos = valPos + int(vl)
			continue
		}
		explicit := w.explicit || t.Group == 0x0002
		seq := isSequence(t, vr, explicit) || (vl == undefinedLength && (vr == "UN" || !explicit) && t != tag.PixelData)
		switch {
		case seq:
			seqEnd := end
			if vl != undefinedLength {
				seqEnd = valPos + int(vl)
			}
			if pos, err = w.items(valPos, seqEnd, vl == undefinedLength, depth+1); err != nil {
				return 0, err
			}
			if vl != undefinedLength {
				pos = seqEnd
			}
		case vl == undefinedLength:
			// Encapsulated pixel data (or another undefined-length OB/OW):
			// fragments as items up to the sequence delimiter.
			if pos, err = w.fragments(valPos, end); err != nil {
				return 0, err
			}
		default:
			if depth == 0 && t == tag.PixelData && w.pixel.Header == nil {
				w.pixel = pixelLocation{Header: bytes.Clone(w.data[pos:valPos]), Offset: valPos, Length: int(vl)}
			}
			pos = valPos + int(vl)
		}
	}
	if inUndefined {
		return 0, fmt.Errorf("missing delimiter before byte %d", end)
	}
	return end, nil
}

// items walks the items of a sequence.
func (w *walker) items(pos, end int, undefined bool, depth int) (int, error) {
	for pos < end {
		valPos, t, _, vl, err := w.readHeader(pos, end)
		if err != nil {
			return 0, err
		}
		switch t {
		case tag.SequenceDelimitationItem:
			return valPos, nil
		case tag.Item:
		default:
			return 0, fmt.Errorf("%s found where a sequence item was expected", tagName(t))
		}
		if vl == undefinedLength {
			if pos, err = w.elements(valPos, end, true, depth+1); err != nil {
				return 0, err
			}
			continue
		}
		if _, err := w.elements(valPos, valPos+int(vl), false, depth+1); err != nil {
			return 0, err
		}
		pos = valPos + int(vl)
	}
	if undefined {
		return 0, fmt.Errorf("sequence without delimiter")
	}
	return end, nil
}

// fragments walks encapsulated pixel data fragments.
func (w *walker) fragments(pos, end int) (int, error) {
	for pos < end {
		valPos, t, _, vl, err := w.readHeader(pos, end)
		if err != nil {
			return 0, err
		}
		if t == tag.SequenceDelimitationItem {
			return valPos, nil
		}
		if t != tag.Item || vl == undefinedLength {
			return 0, fmt.Errorf("malformed encapsulated pixel data at byte %d", pos)
		}
		pos = valPos + int(vl)
	}
	return 0, fmt.Errorf("encapsulated pixel data without delimiter")
}
