package dicomio

import (
	"encoding/binary"
	"errors"
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

// errStopped ends a walk with stopAtPixels at the top-level pixel data.
var errStopped = errors.New("stopped at the pixel data")

// lengthError is a declared length that does not fit.
type lengthError struct{ msg string }

func (e *lengthError) Error() string { return e.msg }

type walker struct {
	data     []byte
	explicit bool
	bo       binary.ByteOrder
	syntax   string
	inMeta   bool // reading the file meta information (explicit VR LE)
	pixelPos int  // offset of the top-level native PixelData value; 0 none
	pixelLen int
	pixelHdr int // offset of that element's header
	// stopAtPixels ends the walk at the top-level PixelData (errStopped)
	// without checking its length against the data: the walk of a file's
	// head read without its pixel data.
	stopAtPixels bool
	encapsulated bool                                           // the walk stopped at encapsulated top-level pixel data
	depth        int                                            // nesting depth of the element being read
	trace        func(pos int, t tag.Tag, vr string, vl uint32) // debugging aid; nil normally
}

// checkLengths returns nil when every element length fits, else an error
// naming the element. It also reports the transfer syntax found in the file
// meta information ("" when absent).
func checkLengths(data []byte) (syntax string, err error) {
	w, err := walk(data, nil)
	return w.syntax, err
}

// checkLengthsTrace is checkLengths calling trace for every element header
// (a debugging aid).
func checkLengthsTrace(data []byte, trace func(pos int, t tag.Tag, vr string, vl uint32)) (string, error) {
	w, err := walk(data, trace)
	return w.syntax, err
}

// walk checks the lengths of data (see checkLengths) and returns the walker
// with what it found: the transfer syntax and where the top-level native
// pixel data lie. The walker is returned even with an error.
func walk(data []byte, trace func(pos int, t tag.Tag, vr string, vl uint32)) (*walker, error) {
	pos := 0
	if len(data) >= 132 && string(data[128:132]) == "DICM" {
		pos = 132
	}
	w := &walker{data: data, explicit: true, bo: binary.LittleEndian, trace: trace}
	err := w.run(pos)
	w.data = nil
	return w, err
}

func (w *walker) run(pos int) error {
	data := w.data
	// File meta information: group 0002, explicit VR little endian. The
	// library reads exactly FileMetaInformationGroupLength bytes of it (and
	// gives up without that element), so the walk does the same.
	if pos+8 <= len(data) && binary.LittleEndian.Uint16(data[pos:]) == 0x0002 {
		w.inMeta = true
		next, t, val, err := w.header(pos, len(data))
		if err != nil {
			return err
		}
		if t != tag.FileMetaInformationGroupLength || len(val) != 4 {
			return fmt.Errorf("file meta information does not start with %s", tagName(tag.FileMetaInformationGroupLength))
		}
		metaEnd := int64(next) + int64(binary.LittleEndian.Uint32(val))
		if metaEnd > int64(len(data)) {
			return &lengthError{fmt.Sprintf("%s declares %d bytes but only %d remain", tagName(t), metaEnd-int64(next), len(data)-next)}
		}
		pos = next
		for pos < int(metaEnd) {
			next, t, val, err := w.header(pos, int(metaEnd))
			if err != nil {
				return err
			}
			if t == tag.TransferSyntaxUID {
				w.syntax = trimUID(val)
			}
			pos = next
		}
		w.inMeta = false
	}
	switch w.syntax {
	case "1.2.840.10008.1.2":
		w.explicit = false
	case "1.2.840.10008.1.2.2":
		w.bo = binary.BigEndian
	case "":
		// Without a transfer syntax the library tries to read the first
		// element in three syntaxes, allocating whatever length each
		// reading declares: refuse implausible ones.
		if pos+12 <= len(data) {
			d := data[pos:]
			cands := []uint32{binary.LittleEndian.Uint32(d[4:])}
			for _, bo := range []binary.ByteOrder{binary.BigEndian, binary.LittleEndian} {
				if longVR[string(d[4:6])] {
					cands = append(cands, bo.Uint32(d[8:]))
				} else {
					cands = append(cands, uint32(bo.Uint16(d[6:])))
				}
			}
			for _, vl := range cands {
				if vl != undefinedLength && vl > 16<<20 && int64(vl) > int64(len(data)) {
					return &lengthError{fmt.Sprintf("no transfer syntax given and the first element declares %d bytes in a %d-byte file", vl, len(data))}
				}
			}
		}
		// Guess byte order and VR style from the first element.
		if pos+6 <= len(data) && binary.LittleEndian.Uint16(data[pos:]) != 0x0008 && binary.BigEndian.Uint16(data[pos:]) == 0x0008 {
			w.bo = binary.BigEndian
		}
		if pos+6 <= len(data) {
			c0, c1 := data[pos+4], data[pos+5]
			w.explicit = c0 >= 'A' && c0 <= 'Z' && c1 >= 'A' && c1 <= 'Z'
		}
	default:
		if ts, ok := transferSyntaxes[w.syntax]; ok && !ts.supported && w.syntax == "1.2.840.10008.1.2.1.99" {
			return nil // deflated: the body cannot be walked
		}
	}
	_, err := w.elements(pos, len(data), false, 0)
	return err
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
	explicit := w.explicit
	if w.inMeta {
		bo, explicit = binary.LittleEndian, true
	}
	t = tag.Tag{Group: bo.Uint16(w.data[pos:]), Element: bo.Uint16(w.data[pos+2:])}
	switch {
	case t.Group == 0xFFFE: // item and delimiters: always tag + 4-byte length
		vl = bo.Uint32(w.data[pos+4:])
		valPos = pos + 8
	case explicit:
		vr = string(w.data[pos+4 : pos+6])
		if !dicomVRs[vr] {
			// PS3.5 6.2 lists every VR; a reader guessing the length of
			// an unknown one would misread everything after it.
			return 0, t, vr, 0, fmt.Errorf("%s at byte %d has the unknown value representation %q", tagName(t), pos, vr)
		}
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
	if w.trace != nil {
		w.trace(pos, t, vr, vl)
	}
	if (t == tag.ItemDelimitationItem || t == tag.SequenceDelimitationItem) && vl != 0 {
		return 0, t, vr, vl, fmt.Errorf("%s at byte %d has length %d instead of 0", tagName(t), pos, vl)
	}
	if w.stopAtPixels && w.depth == 0 && t == tag.PixelData {
		return valPos, t, vr, vl, nil // its value is not in the head
	}
	if vl != undefinedLength && int64(valPos)+int64(vl) > int64(end) {
		return 0, t, vr, vl, &lengthError{fmt.Sprintf("%s declares %d bytes but only %d remain", tagName(t), vl, end-valPos)}
	}
	return valPos, t, vr, vl, nil
}

// libraryVR returns the VR the DICOM library will use for an element: the
// VR written (explicit syntaxes), else the first VR of its dictionary entry
// (OW for pixel and overlay data), else UN.
func libraryVR(t tag.Tag, vr string, explicit bool) string {
	if explicit {
		return vr
	}
	if t == tag.PixelData || t == tag.OverlayData {
		return "OW"
	}
	if info, err := tag.Find(t); err == nil && len(info.VRs) > 0 {
		return info.VRs[0]
	}
	return "UN"
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
		w.depth = depth
		valPos, t, vr, vl, err := w.readHeader(pos, end)
		if err != nil {
			return 0, err
		}
		if w.stopAtPixels && depth == 0 && t == tag.PixelData {
			w.pixelHdr, w.pixelPos = pos, valPos
			if vl == undefinedLength {
				w.encapsulated = true
			} else {
				w.pixelLen = int(vl)
			}
			return 0, errStopped
		}
		switch {
		case t == tag.ItemDelimitationItem && inUndefined:
			return valPos, nil
		case t == tag.ItemDelimitationItem || t == tag.SequenceDelimitationItem:
			// The library reads a delimiter out of place as an ordinary
			// element with a VR, so its view and ours would part here.
			return 0, fmt.Errorf("%s out of place at byte %d", tagName(t), pos)
		case t == tag.Item:
			// A stray item at this level: the library parses its content
			// as elements, so it is walked the same way.
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
			continue
		}
		lvr := libraryVR(t, vr, w.explicit)
		switch {
		case t == tag.PixelData && vl == undefinedLength:
			// Encapsulated pixel data: fragments up to the delimiter.
			if pos, err = w.fragments(valPos, end); err != nil {
				return 0, err
			}
		case t != tag.PixelData && (lvr == "SQ" || (lvr == "UN" && vl == undefinedLength)):
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
		case vl == undefinedLength && (lvr == "OB" || lvr == "OW"):
			if pos, err = w.fragments(valPos, end); err != nil {
				return 0, err
			}
		case vl == undefinedLength:
			// The library would read the value with the undefined length
			// (0xFFFFFFFF bytes) as its size.
			return 0, &lengthError{fmt.Sprintf("%s (VR %s) has undefined length", tagName(t), lvr)}
		default:
			if depth == 0 && t == tag.PixelData {
				w.pixelPos, w.pixelLen = valPos, int(vl)
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
		w.depth = depth
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
