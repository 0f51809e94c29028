package dicomio

import (
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// The DICOM library's parse dominates the time of reading a case of many
// small files. For the common case, a plain image file (an image with a
// native pixel data element and no functional groups) in Explicit or
// Implicit VR Little Endian with the DICM preamble, fastElems reads the
// attributes the reader uses straight from the bytes already in memory and
// builds the same elements the library would (same VR kinds, same string
// trimming and splitting, same numeric conversions). Anything else, or
// anything the library would read differently or refuse, is declined and
// goes through the library unchanged, which also reports the errors.

// fastAttrs switches the direct attribute reader on; off, every file goes
// through the DICOM library.
var fastAttrs = true

// fastTopLevel are the top-level attributes fill and its helpers read (plus
// the ones that decide whether the file is a plain image). Items of the
// sequences listed here are kept whole.
var fastTopLevel = map[tag.Tag]bool{
	tag.TransferSyntaxUID: true, tag.MediaStorageSOPClassUID: true,
	tag.SOPClassUID: true, tag.SOPInstanceUID: true, tag.Modality: true,
	tag.StudyInstanceUID: true, tag.SeriesInstanceUID: true, tag.SeriesDescription: true,
	tag.SeriesNumber: true, tag.AcquisitionNumber: true, tag.FrameOfReferenceUID: true,
	tag.ImageType: true, tag.PatientName: true, tag.PatientID: true, tag.PatientBirthDate: true,
	tag.StudyDate: true, tag.StudyDescription: true, tag.InstitutionName: true, tag.MagneticFieldStrength: true,
	tag.EchoTime: true, tag.WindowCenter: true, tag.WindowWidth: true,
	tag.PixelData: true, tagFloatPixelData: true, tagDoubleFloatPixelData: true,
	tag.Rows: true, tag.Columns: true, tag.BitsAllocated: true, tag.BitsStored: true,
	tag.HighBit: true, tag.PixelRepresentation: true, tag.SamplesPerPixel: true,
	tag.NumberOfFrames: true, tagPerFrameGroups: true, tagSharedGroups: true,
	tagGridFrameOffset: true, tag.ImagePositionPatient: true, tag.PixelSpacing: true,
	tag.SliceThickness: true, tag.TemporalPositionIdentifier: true,
	tagComplexImageComponent: true, tag.RescaleSlope: true, tag.RescaleIntercept: true,
	tagRWVMapping: true, tag.ImageOrientationPatient: true, tag.AcquisitionDateTime: true,
	tag.AcquisitionDate: true, tag.ContentDate: true, tag.SeriesDate: true,
	tag.AcquisitionTime: true, tag.ContentTime: true, tag.SpecificCharacterSet: true,
}

// fastVRs are the explicit VRs whose reading by the library fastElems
// reproduces; true marks those with a 4-byte length as the library reads
// them (OV, SV and UV, which it reads with a 2-byte length, are declined).
var fastVRs = map[string]bool{
	"AE": false, "AS": false, "AT": false, "CS": false, "DA": false, "DS": false, "DT": false,
	"FL": false, "FD": false, "IS": false, "LO": false, "LT": false, "PN": false, "SH": false,
	"SL": false, "SS": false, "ST": false, "TM": false, "UI": false, "UL": false, "US": false,
	"OB": true, "OD": true, "OF": true, "OL": true, "OW": true, "SQ": true, "UN": true,
	"UC": true, "UR": true, "UT": true,
}

// vrEntry is what element needs of an explicit VR: its name (one string
// per VR, not one per element) and whether it has a 4-byte length.
type vrEntry struct {
	name        string
	known, long bool
}

// vrTable holds the VRs of fastVRs by their two letters ('A'..'Z' each),
// and topLevelKeys the tags of fastTopLevel as group<<16 | element: the
// lookups made for every element of every file.
var (
	vrTable      [26 * 26]vrEntry
	topLevelKeys = map[uint32]bool{}
)

func init() {
	for vr, long := range fastVRs {
		vrTable[int(vr[0]-'A')*26+int(vr[1]-'A')] = vrEntry{vr, true, long}
	}
	for t := range fastTopLevel {
		topLevelKeys[uint32(t.Group)<<16|uint32(t.Element)] = true
	}
}

// lookupVR returns the entry of the VR spelt a, b (known false when
// fastElems does not read it).
func lookupVR(a, b byte) vrEntry {
	if a < 'A' || a > 'Z' || b < 'A' || b > 'Z' {
		return vrEntry{}
	}
	return vrTable[int(a-'A')*26+int(b-'A')]
}

// fastReader holds the state of one direct read.
type fastReader struct {
	data     []byte
	implicit bool
	pixels   bool
	charset  bool // a SpecificCharacterSet was read: non-ASCII strings are declined
	meta     bool // reading the file meta information
}

// fastElems returns the top-level elements of a plain image file as the
// library would give them for fill (only the attributes the reader uses),
// or ok false when the file must go through the library. It never panics
// on any input: every length is checked against the enclosing bounds.
func fastElems(data []byte, pixels bool) (es elems, ok bool) {
	if len(data) < 144 || string(data[128:132]) != "DICM" {
		return nil, false
	}
	r := &fastReader{data: data, pixels: pixels}
	// File meta information: explicit VR little endian, length from the
	// group length (which must be an UL, as the library requires).
	pos := 132
	if binary.LittleEndian.Uint16(data[pos:]) != 0x0002 || binary.LittleEndian.Uint16(data[pos+2:]) != 0x0000 ||
		string(data[pos+4:pos+6]) != "UL" || binary.LittleEndian.Uint16(data[pos+6:]) != 4 {
		return nil, false
	}
	metaEnd := int64(pos+12) + int64(binary.LittleEndian.Uint32(data[pos+8:]))
	if metaEnd > int64(len(data)) {
		return nil, false
	}
	es = make(elems, 0, 48)
	var ok2 bool
	r.meta = true
	if es, ok2 = r.list(es, pos+12, int(metaEnd), 0, true); !ok2 {
		return nil, false
	}
	r.meta = false
	syntax := ""
	for _, e := range es {
		if e.Tag == tag.TransferSyntaxUID {
			if v, isStr := e.Value.GetValue().([]string); isStr && len(v) > 0 {
				syntax = v[0]
			}
			break
		}
	}
	switch syntax {
	case "1.2.840.10008.1.2":
		r.implicit = true
	case "1.2.840.10008.1.2.1":
	default:
		return nil, false
	}
	nMeta := len(es)
	if es, ok2 = r.list(es, int(metaEnd), len(data), 0, true); !ok2 {
		return nil, false
	}
	// Plain images only.
	body := es[nMeta:]
	pd := body.find(tag.PixelData)
	if pd == nil || pd.ValueLength == undefinedLength ||
		body.find(tagPerFrameGroups) != nil || body.find(tagSharedGroups) != nil ||
		body.find(tagFloatPixelData) != nil || body.find(tagDoubleFloatPixelData) != nil {
		return nil, false
	}
	if strings.ToUpper(es.str(tag.Modality)) == "RTSTRUCT" || es.str(tag.SOPClassUID) == sopRTStructureSet ||
		es.str(tag.MediaStorageSOPClassUID) == sopRTStructureSet {
		return nil, false
	}
	return es, true
}

// list reads the elements in [pos, end) at one level, appending the kept
// ones to out (at the top level only those of fastTopLevel, inside items
// all). depth 0 is the top level.
func (r *fastReader) list(out elems, pos, end, depth int, top bool) (elems, bool) {
	if depth > 16 {
		return nil, false
	}
	for pos < end {
		e, next, ok := r.element(pos, end, depth, top)
		if !ok {
			return nil, false
		}
		if e != nil {
			out = append(out, e)
		}
		pos = next
	}
	return out, true
}

// element reads the element at pos (its value must end by end) and returns
// it (nil when not kept) and the position after it.
func (r *fastReader) element(pos, end, depth int, top bool) (*dicom.Element, int, bool) {
	d := r.data
	if pos+8 > end {
		return nil, 0, false
	}
	t := tag.Tag{Group: binary.LittleEndian.Uint16(d[pos:]), Element: binary.LittleEndian.Uint16(d[pos+2:])}
	if t.Group == 0xFFFE {
		return nil, 0, false // items and delimiters only where sequences expect them
	}
	if (t.Group == 0x0002) != r.meta {
		return nil, 0, false // group 0002 outside the file meta information, or another group in it
	}
	var vr string
	var vl uint32
	valPos := pos + 8
	if r.implicit && !r.meta {
		// The library's VR for an implicit element: first VR of the
		// dictionary entry (OW for pixel and overlay data), else UN.
		vr = tag.UnknownVR
		if info, err := tag.Find(t); err == nil {
			if len(info.VRs) == 0 {
				return nil, 0, false
			}
			vr = info.VRs[0]
			if t == tag.PixelData || t == tag.OverlayData {
				vr = "OW"
			}
		}
		vl = binary.LittleEndian.Uint32(d[pos+4:])
	} else {
		e := lookupVR(d[pos+4], d[pos+5])
		if !e.known {
			return nil, 0, false
		}
		vr = e.name
		if e.long {
			if pos+12 > end {
				return nil, 0, false
			}
			vl = binary.LittleEndian.Uint32(d[pos+8:])
			valPos = pos + 12
		} else {
			vl = uint32(binary.LittleEndian.Uint16(d[pos+6:]))
			if vl == 0xFFFF {
				return nil, 0, false // the library reads this as undefined
			}
		}
	}
	keep := !top || topLevelKeys[uint32(t.Group)<<16|uint32(t.Element)]
	kind := tag.GetVRKind(t, vr)
	if vl == undefinedLength {
		if kind != tag.VRSequence {
			return nil, 0, false
		}
		items, next, ok := r.sequence(valPos, end, true, depth)
		if !ok {
			return nil, 0, false
		}
		if !keep {
			return nil, next, true
		}
		e, ok := seqElement(t, vr, vl, items)
		return e, next, ok
	}
	if int64(valPos)+int64(vl) > int64(end) {
		return nil, 0, false
	}
	next := valPos + int(vl)
	val := d[valPos:next]
	var data any
	switch kind {
	case tag.VRItem:
		return nil, 0, false
	case tag.VRPixelData:
		if depth != 0 {
			return nil, 0, false
		}
		info := dicom.PixelDataInfo{IntentionallySkipped: true}
		if r.pixels {
			info = dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: val}
		}
		data = info
	case tag.VRSequence:
		items, _, ok := r.sequence(valPos, next, false, depth)
		if !ok {
			return nil, 0, false
		}
		if !keep {
			return nil, next, true
		}
		e, ok := seqElement(t, vr, vl, items)
		return e, next, ok
	case tag.VRBytes, tag.VRUnknown:
		if vr == "OW" && vl%2 != 0 {
			return nil, 0, false
		}
		if vr != "OW" && vr != "OB" && vr != "UN" {
			return nil, 0, false
		}
		if !keep {
			return nil, next, true
		}
		data = append([]byte{}, val...)
	case tag.VRUInt16List, tag.VRInt16List, tag.VRTagList, tag.VRUInt32List, tag.VRInt32List:
		size := 2
		if kind == tag.VRUInt32List || kind == tag.VRInt32List {
			size = 4
		}
		if len(val)%size != 0 {
			return nil, 0, false
		}
		if !keep {
			return nil, next, true
		}
		v := make([]int, 0, len(val)/2)
		for n := 0; n < len(val); n += size {
			switch kind {
			case tag.VRUInt16List, tag.VRTagList:
				v = append(v, int(binary.LittleEndian.Uint16(val[n:])))
			case tag.VRInt16List:
				v = append(v, int(int16(binary.LittleEndian.Uint16(val[n:]))))
			case tag.VRUInt32List:
				v = append(v, int(binary.LittleEndian.Uint32(val[n:])))
			default:
				v = append(v, int(int32(binary.LittleEndian.Uint32(val[n:]))))
			}
		}
		data = v
	case tag.VRFloat32List, tag.VRFloat64List:
		size := 4
		if kind == tag.VRFloat64List {
			size = 8
		}
		if len(val)%size != 0 {
			return nil, 0, false
		}
		if !keep {
			return nil, next, true
		}
		v := make([]float64, 0, len(val)/2)
		for n := 0; n < len(val); n += size {
			if size == 8 {
				v = append(v, math.Float64frombits(binary.LittleEndian.Uint64(val[n:])))
				continue
			}
			// As the library does: through the shortest decimal form.
			f, err := strconv.ParseFloat(fmt.Sprint(math.Float32frombits(binary.LittleEndian.Uint32(val[n:]))), 64)
			if err != nil {
				return nil, 0, false
			}
			v = append(v, f)
		}
		data = v
	case tag.VRDate:
		if r.charset && !plainASCII(val) {
			return nil, 0, false
		}
		if !keep {
			return nil, next, true
		}
		data = []string{strings.Trim(string(val), " \000")}
	default: // strings
		if r.charset && !plainASCII(val) {
			return nil, 0, false
		}
		if !keep && !(top && t == tag.SpecificCharacterSet) {
			return nil, next, true
		}
		data = libraryStrings(val)
		if top && t == tag.SpecificCharacterSet {
			r.charset = true
		}
	}
	v, err := dicom.NewValue(data)
	if err != nil {
		return nil, 0, false
	}
	return &dicom.Element{Tag: t, ValueRepresentation: kind, RawValueRepresentation: vr, ValueLength: vl, Value: v}, next, true
}

// seqElement builds a sequence element from its items.
func seqElement(t tag.Tag, vr string, vl uint32, items [][]*dicom.Element) (*dicom.Element, bool) {
	v, err := dicom.NewValue(items)
	if err != nil {
		return nil, false
	}
	return &dicom.Element{Tag: t, ValueRepresentation: tag.GetVRKind(t, vr), RawValueRepresentation: vr, ValueLength: vl, Value: v}, true
}

// sequence reads the items of a sequence whose content starts at pos; with
// undefined true it ends with a sequence delimiter (the position after it
// is returned), else at end.
func (r *fastReader) sequence(pos, end int, undefined bool, depth int) ([][]*dicom.Element, int, bool) {
	if depth > 16 {
		return nil, 0, false
	}
	d := r.data
	var items [][]*dicom.Element
	for {
		if pos == end && !undefined {
			return items, end, true
		}
		if pos+8 > end {
			return nil, 0, false
		}
		t := tag.Tag{Group: binary.LittleEndian.Uint16(d[pos:]), Element: binary.LittleEndian.Uint16(d[pos+2:])}
		vl := binary.LittleEndian.Uint32(d[pos+4:])
		if t == tag.SequenceDelimitationItem && undefined {
			if vl != 0 {
				return nil, 0, false
			}
			return items, pos + 8, true
		}
		if t != tag.Item {
			return nil, 0, false
		}
		pos += 8
		var it elems
		var ok bool
		if vl == undefinedLength {
			// Elements up to the item delimiter.
			it = elems{}
			for {
				if pos+8 > end {
					return nil, 0, false
				}
				if binary.LittleEndian.Uint16(d[pos:]) == 0xFFFE && binary.LittleEndian.Uint16(d[pos+2:]) == 0xE00D {
					if binary.LittleEndian.Uint32(d[pos+4:]) != 0 {
						return nil, 0, false
					}
					pos += 8
					break
				}
				e, next, ok := r.element(pos, end, depth+1, false)
				if !ok || e == nil {
					return nil, 0, false
				}
				it = append(it, e)
				pos = next
			}
		} else {
			if int64(pos)+int64(vl) > int64(end) {
				return nil, 0, false
			}
			if it, ok = r.list(elems{}, pos, pos+int(vl), depth+1, false); !ok {
				return nil, 0, false
			}
			pos += int(vl)
		}
		items = append(items, []*dicom.Element(it))
	}
}

// libraryStrings splits a string value as the library does: unless the
// value is only white space, spaces and NULs are trimmed from both ends;
// then it is split at backslashes.
func libraryStrings(val []byte) []string {
	// Plain ASCII (nearly always): the same steps on the bytes, with one
	// string for the value and the parts cut from it.
	onlySpaces := true
	for _, b := range val {
		if b >= 0x80 {
			return libraryStringsUTF8(val)
		}
		if onlySpaces && b != ' ' && (b < '\t' || b > '\r') { // unicode.IsSpace for ASCII
			onlySpaces = false
		}
	}
	if !onlySpaces {
		lo, hi := 0, len(val)
		for lo < hi && (val[lo] == ' ' || val[lo] == 0) {
			lo++
		}
		for hi > lo && (val[hi-1] == ' ' || val[hi-1] == 0) {
			hi--
		}
		val = val[lo:hi]
	}
	parts := 1
	for _, b := range val {
		if b == '\\' {
			parts++
		}
	}
	s := string(val)
	if parts == 1 {
		return []string{s}
	}
	out := make([]string, 0, parts)
	for {
		i := strings.IndexByte(s, '\\')
		if i < 0 {
			return append(out, s)
		}
		out = append(out, s[:i])
		s = s[i+1:]
	}
}

// libraryStringsUTF8 is libraryStrings for values with bytes above 0x7F.
func libraryStringsUTF8(val []byte) []string {
	s := string(val)
	onlySpaces := true
	for _, c := range s {
		if !unicode.IsSpace(c) {
			onlySpaces = false
			break
		}
	}
	if !onlySpaces {
		s = strings.Trim(s, " \000")
	}
	return strings.Split(s, "\\")
}

// plainASCII reports whether val holds no byte a character-set decoder
// could change (none above 0x7F, no ESC).
func plainASCII(val []byte) bool {
	for _, b := range val {
		if b >= 0x80 || b == 0x1B {
			return false
		}
	}
	return true
}
