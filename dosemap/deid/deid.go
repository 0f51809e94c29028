// Package deid makes de-identified copies of DICOM case folders for
// teaching, following the Basic Application Level Confidentiality Profile
// of DICOM PS3.15 Annex E (Table E.1-1) for the attributes that MR,
// thermometry and RT Structure Set files carry, with the Clean Descriptors
// Option and, when dates are shifted, the Retain Longitudinal Temporal
// Information with Modified Dates Option.
//
// What is done to every data set, recursively through sequences:
//
//   - Patient name and ID are replaced by a neutral label; birth date, sex,
//     age, size, weight, address, telephone, other IDs and names, comments
//     and similar patient attributes are emptied or removed.
//   - Institution, department, station, device serial number and every
//     person name (referring, performing, reading physician, operator,
//     reviewer...) are removed or emptied (person names are kept present
//     but empty, as several are Type 2 in their modules); accession number
//     and study ID are emptied.
//   - Every UID outside the DICOM root 1.2.840.10008 (which names standard
//     SOP classes and transfer syntaxes) is replaced by 2.25.<decimal of the
//     first 128 bits of SHA-256(salt ‖ uid)> (PS3.5 B.2, UUID-derived UIDs):
//     one UID always maps to the same replacement under one salt, so
//     series, study, frame of reference and SOP instance references
//     (ReferencedSOPInstanceUID, ReferencedFrameOfReferenceUID, ...) still
//     hold across the files of a case.
//   - Dates (DA, and the date part of DT) are shifted by a whole number of
//     days, or replaced by the dummy date 19000101; times are kept, so the
//     timing of the thermometry frames is unchanged.
//   - Private attributes (odd groups) are removed.
//   - Descriptions and labels that are kept (series, study, protocol,
//     structure names) are cleaned of any identifying value found in the
//     case.
//   - PatientIdentityRemoved (0012,0062) = YES, DeidentificationMethod
//     (0012,0063) and DeidentificationMethodCodeSequence (0012,0064) record
//     what was done; LongitudinalTemporalInformationModified (0028,0303)
//     says whether dates were modified or removed.
//
// Pixel data are copied byte for byte (compressed frames too; only the
// Basic Offset Table of encapsulated data is rewritten, and may come out
// empty for one frame, which PS3.5 A.4 allows); files that declare burned-in
// annotation (0028,0301 = YES) are refused, since identity in the pixels
// cannot be removed here.
package deid

import (
	"bytes"
	"crypto/rand"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"math/big"
	"sort"
	"strings"
	"time"

	"dosecover/dosemap/dicomwrite"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// DateMode says what happens to dates.
type DateMode int

// Date modes.
const (
	DatesShift  DateMode = iota // shift every date by Options.ShiftDays (or one derived from the salt)
	DatesRemove                 // replace every date by the dummy date 19000101
)

// String returns "shift" or "remove".
func (m DateMode) String() string {
	if m == DatesRemove {
		return "remove"
	}
	return "shift"
}

// ParseDateMode reads "shift" or "remove".
func ParseDateMode(s string) (DateMode, error) {
	switch strings.ToLower(s) {
	case "shift":
		return DatesShift, nil
	case "remove":
		return DatesRemove, nil
	}
	return 0, fmt.Errorf("date mode %q: want shift or remove", s)
}

// Options control a de-identification.
type Options struct {
	// Salt keys the UID map, the date offset and the label. Empty: 32
	// random bytes, so the replacement UIDs cannot be recomputed from the
	// originals by anyone. Give a salt to get a reproducible copy.
	Salt string
	// Dates is DatesShift (default) or DatesRemove.
	Dates DateMode
	// ShiftDays is the date offset for DatesShift; 0 derives one from the
	// salt between -3650 and -366 days.
	ShiftDays int
	// Label replaces PatientID, and PatientName with its first "-" turned
	// into the "^" component separator; empty: "TEACHING-" and eight hex
	// digits derived from the salt and the original patient ID.
	Label string
	// Study is the StudyInstanceUID of the study to copy from a folder
	// that holds several; empty: the folder must hold one study.
	Study string
}

// DummyDate replaces every date in DatesRemove mode (PS3.15 Annex E
// action D: a dummy value consistent with the VR).
const DummyDate = "19000101"

// Deidentifier de-identifies data sets consistently: one instance maps the
// same UID to the same replacement in every file it handles.
type Deidentifier struct {
	opt    Options
	salt   []byte
	shift  int
	tokens map[string]bool // identifying strings found so far (upper case)
	uids   map[string]string
	labels map[string]string
}

// New returns a Deidentifier for opt.
func New(opt Options) (*Deidentifier, error) {
	d := &Deidentifier{opt: opt, tokens: map[string]bool{}, uids: map[string]string{}, labels: map[string]string{}}
	if opt.Salt == "" {
		b := make([]byte, 32)
		if _, err := rand.Read(b); err != nil {
			return nil, fmt.Errorf("de-identification: drawing a random salt: %w", err)
		}
		d.salt = b
	} else {
		d.salt = []byte(opt.Salt)
	}
	d.shift = opt.ShiftDays
	if d.shift == 0 {
		h := d.hash("date-offset")
		d.shift = -(366 + int(binary.BigEndian.Uint32(h[:4])%(3650-366+1)))
	}
	return d, nil
}

// ShiftDays returns the date offset applied in DatesShift mode.
func (d *Deidentifier) ShiftDays() int { return d.shift }

func (d *Deidentifier) hash(s string) [32]byte {
	h := sha256.New()
	h.Write(d.salt)
	h.Write([]byte{0})
	h.Write([]byte(s))
	var out [32]byte
	copy(out[:], h.Sum(nil))
	return out
}

// UID returns the replacement of uid: uid itself when it lies under the
// DICOM root 1.2.840.10008 (standard SOP classes, transfer syntaxes,
// coding schemes), else 2.25.<decimal of the first 128 bits of
// SHA-256(salt ‖ uid)> (PS3.5 B.2). The result is at most 44 characters.
func (d *Deidentifier) UID(uid string) string {
	uid = strings.TrimRight(uid, "\x00 ")
	if uid == "" || strings.HasPrefix(uid, "1.2.840.10008.") {
		return uid
	}
	if r, ok := d.uids[uid]; ok {
		return r
	}
	h := d.hash("uid:" + uid)
	r := "2.25." + new(big.Int).SetBytes(h[:16]).String()
	d.uids[uid] = r
	return r
}

// label returns the replacement name and ID for a patient ID.
func (d *Deidentifier) label(id string) string {
	if d.opt.Label != "" {
		return d.opt.Label
	}
	if l, ok := d.labels[id]; ok {
		return l
	}
	h := d.hash("patient:" + id)
	l := "TEACHING-" + strings.ToUpper(hex.EncodeToString(h[:4]))
	d.labels[id] = l
	return l
}

// action is what the profile does to one attribute.
type action int

const (
	actRemove  action = iota // X: remove
	actEmpty                 // Z: keep, zero length
	actClean                 // C: keep, cleaned of identifying values
	actReplace               // D: replace with a dummy value (handled per tag)
)

// profile lists the attributes of PS3.15 Table E.1-1 that these cases can
// carry, with the action of the Basic Profile (plus Clean Descriptors
// Option). Dates, times, UIDs, person names and private attributes are
// handled by VR and group, not listed here.
var profile = map[tag.Tag]action{
	tg(0x0002, 0x0016): actRemove,  // Source Application Entity Title
	tg(0x0002, 0x0017): actRemove,  // Sending Application Entity Title
	tg(0x0002, 0x0018): actRemove,  // Receiving Application Entity Title
	tg(0x0008, 0x0050): actEmpty,   // Accession Number
	tg(0x0008, 0x0080): actRemove,  // Institution Name
	tg(0x0008, 0x0081): actRemove,  // Institution Address
	tg(0x0008, 0x0082): actRemove,  // Institution Code Sequence
	tg(0x0008, 0x0092): actRemove,  // Referring Physician's Address
	tg(0x0008, 0x0094): actRemove,  // Referring Physician's Telephone Numbers
	tg(0x0008, 0x0096): actRemove,  // Referring Physician Identification Sequence
	tg(0x0008, 0x1010): actRemove,  // Station Name
	tg(0x0008, 0x1030): actClean,   // Study Description
	tg(0x0008, 0x103E): actClean,   // Series Description
	tg(0x0008, 0x1040): actRemove,  // Institutional Department Name
	tg(0x0008, 0x1049): actRemove,  // Physician(s) of Record Identification Sequence
	tg(0x0008, 0x1052): actRemove,  // Performing Physician Identification Sequence
	tg(0x0008, 0x1062): actRemove,  // Physician(s) Reading Study Identification Sequence
	tg(0x0008, 0x1072): actRemove,  // Operator Identification Sequence
	tg(0x0008, 0x1080): actRemove,  // Admitting Diagnoses Description
	tg(0x0008, 0x1084): actRemove,  // Admitting Diagnoses Code Sequence
	tg(0x0008, 0x1120): actRemove,  // Referenced Patient Sequence
	tg(0x0008, 0x2111): actRemove,  // Derivation Description
	tg(0x0010, 0x0020): actReplace, // Patient ID
	tg(0x0010, 0x0021): actRemove,  // Issuer of Patient ID
	tg(0x0010, 0x0030): actEmpty,   // Patient's Birth Date
	tg(0x0010, 0x0032): actRemove,  // Patient's Birth Time
	tg(0x0010, 0x0040): actEmpty,   // Patient's Sex
	tg(0x0010, 0x0050): actRemove,  // Patient's Insurance Plan Code Sequence
	tg(0x0010, 0x1000): actRemove,  // Other Patient IDs
	tg(0x0010, 0x1001): actRemove,  // Other Patient Names
	tg(0x0010, 0x1002): actRemove,  // Other Patient IDs Sequence
	tg(0x0010, 0x1005): actRemove,  // Patient's Birth Name
	tg(0x0010, 0x1010): actRemove,  // Patient's Age
	tg(0x0010, 0x1020): actRemove,  // Patient's Size
	tg(0x0010, 0x1030): actRemove,  // Patient's Weight
	tg(0x0010, 0x1040): actRemove,  // Patient's Address
	tg(0x0010, 0x1060): actRemove,  // Patient's Mother's Birth Name
	tg(0x0010, 0x1080): actRemove,  // Military Rank
	tg(0x0010, 0x1081): actRemove,  // Branch of Service
	tg(0x0010, 0x1090): actRemove,  // Medical Record Locator
	tg(0x0010, 0x2000): actRemove,  // Medical Alerts
	tg(0x0010, 0x2110): actRemove,  // Allergies
	tg(0x0010, 0x2150): actRemove,  // Country of Residence
	tg(0x0010, 0x2152): actRemove,  // Region of Residence
	tg(0x0010, 0x2154): actRemove,  // Patient's Telephone Numbers
	tg(0x0010, 0x2160): actRemove,  // Ethnic Group
	tg(0x0010, 0x2180): actRemove,  // Occupation
	tg(0x0010, 0x21A0): actRemove,  // Smoking Status
	tg(0x0010, 0x21B0): actRemove,  // Additional Patient History
	tg(0x0010, 0x21C0): actRemove,  // Pregnancy Status
	tg(0x0010, 0x21F0): actRemove,  // Patient's Religious Preference
	tg(0x0010, 0x4000): actRemove,  // Patient Comments
	tg(0x0018, 0x1000): actRemove,  // Device Serial Number
	tg(0x0018, 0x1030): actClean,   // Protocol Name
	tg(0x0018, 0x1400): actRemove,  // Acquisition Device Processing Description
	tg(0x0018, 0x9424): actRemove,  // Acquisition Protocol Description
	tg(0x0020, 0x0010): actEmpty,   // Study ID
	tg(0x0020, 0x4000): actRemove,  // Image Comments
	tg(0x0032, 0x1060): actRemove,  // Requested Procedure Description
	tg(0x0032, 0x4000): actRemove,  // Study Comments
	tg(0x0038, 0x0010): actRemove,  // Admission ID
	tg(0x0038, 0x0300): actRemove,  // Current Patient Location
	tg(0x0038, 0x0400): actRemove,  // Patient's Institution Residence
	tg(0x0038, 0x0500): actRemove,  // Patient State
	tg(0x0040, 0x0006): actRemove,  // Scheduled Performing Physician's Name
	tg(0x0040, 0x0241): actRemove,  // Performed Station AE Title
	tg(0x0040, 0x0242): actRemove,  // Performed Station Name
	tg(0x0040, 0x0243): actRemove,  // Performed Location
	tg(0x0040, 0x0253): actRemove,  // Performed Procedure Step ID
	tg(0x0040, 0x0254): actRemove,  // Performed Procedure Step Description
	tg(0x0040, 0x0275): actRemove,  // Request Attributes Sequence
	tg(0x0040, 0xA730): actRemove,  // Content Sequence (of SR; not used by these cases)
	tg(0x3006, 0x0002): actClean,   // Structure Set Label
	tg(0x3006, 0x0004): actRemove,  // Structure Set Name
	tg(0x3006, 0x0006): actRemove,  // Structure Set Description
	tg(0x3006, 0x0026): actClean,   // ROI Name
	tg(0x3006, 0x0028): actRemove,  // ROI Description
	tg(0x3006, 0x0038): actRemove,  // ROI Generation Description
	tg(0x3006, 0x0088): actRemove,  // ROI Observation Description
	tg(0x300E, 0x0008): actRemove,  // Reviewer Name
	tg(0x4008, 0x0114): actRemove,  // Physician Approving Interpretation
	tg(0xFFFC, 0xFFFC): actRemove,  // Data Set Trailing Padding
}

var (
	tagPatientName = tg(0x0010, 0x0010)
	tagPatientID   = tg(0x0010, 0x0020)
)

// identityTags hold values worth cleaning out of kept text wherever they
// appear.
var identityTags = []tag.Tag{
	tagPatientName, tagPatientID,
	tg(0x0010, 0x0030), tg(0x0010, 0x1000), tg(0x0010, 0x1001), tg(0x0010, 0x1040),
	tg(0x0008, 0x0080), tg(0x0008, 0x0081), tg(0x0008, 0x1040),
	tg(0x0008, 0x0050), tg(0x0018, 0x1000),
}

// Collect records the identifying values of ds (names and their parts,
// IDs, birth date, institution, station) so that Dataset can clean them out
// of kept descriptions, also in other files of the same case.
func (d *Deidentifier) Collect(ds *dicom.Dataset) {
	walk(ds.Elements, func(e *dicom.Element) {
		isID := e.RawValueRepresentation == "PN"
		for _, t := range identityTags {
			if e.Tag == t {
				isID = true
			}
		}
		if !isID {
			return
		}
		for _, s := range stringsOf(e) {
			d.addValue(s)
		}
	})
}

func (d *Deidentifier) addToken(s string) {
	s = asciiUpper(strings.TrimSpace(s))
	if len(s) >= 3 { // shorter parts (initials, "MR") would shred ordinary words
		d.tokens[s] = true
	}
}

// asciiUpper upper-cases the ASCII letters of s and keeps every other byte
// as it is, so that positions in the result are positions in s whatever
// the bytes are (Latin-1 names without a SpecificCharacterSet are not
// valid UTF-8, and Unicode upper-casing would change their length).
func asciiUpper(s string) string {
	b := []byte(s)
	for i, c := range b {
		if c >= 'a' && c <= 'z' {
			b[i] = c - 'a' + 'A'
		}
	}
	return string(b)
}

func walk(es []*dicom.Element, fn func(*dicom.Element)) {
	for _, e := range es {
		fn(e)
		if e.Value != nil && e.Value.ValueType() == dicom.Sequences {
			for _, it := range e.Value.GetValue().([]*dicom.SequenceItemValue) {
				walk(it.GetValue().([]*dicom.Element), fn)
			}
		}
	}
}

func stringsOf(e *dicom.Element) []string {
	if e.Value == nil || e.Value.ValueType() != dicom.Strings {
		return nil
	}
	return e.Value.GetValue().([]string)
}

func setStrings(e *dicom.Element, s []string) error {
	v, err := dicom.NewValue(s)
	if err != nil {
		return err
	}
	e.Value = v
	e.ValueLength = 0
	return nil
}

// Blank returns s with every identifying value of values blanked out by
// "X" characters of the same length: each value whole and each of its
// parts (split at "^", "=", spaces and commas, as person names are) of 3
// bytes or more, in any ASCII case. Bytes are compared as they are, so
// text that is not valid UTF-8 (Latin-1 names without a character set) is
// handled too. It is the cleaning the de-identified copies get, for text
// that dosecover writes itself (reports, tables, messages).
func Blank(s string, values ...string) string {
	d := &Deidentifier{tokens: map[string]bool{}}
	for _, v := range values {
		d.addValue(v)
	}
	return d.clean(s)
}

// addValue records v and its parts as identifying tokens.
func (d *Deidentifier) addValue(v string) {
	d.addToken(v)
	for _, part := range strings.FieldsFunc(v, func(r rune) bool { return r == '^' || r == '=' || r == ' ' || r == ',' }) {
		d.addToken(part)
	}
}

// clean replaces every identifying token in s by "X" characters of the
// same length (case-insensitive).
func (d *Deidentifier) clean(s string) string {
	if len(d.tokens) == 0 {
		return s
	}
	toks := make([]string, 0, len(d.tokens))
	for t := range d.tokens {
		toks = append(toks, t)
	}
	// Longest first, so a full name goes before its parts.
	sort.Slice(toks, func(a, b int) bool {
		if len(toks[a]) != len(toks[b]) {
			return len(toks[a]) > len(toks[b])
		}
		return toks[a] < toks[b]
	})
	// Matching is on ASCII-upper-cased bytes, which have the positions of
	// s; every replacement keeps the length, so the positions stay valid.
	// Passes repeat until none changes anything (a replacement may complete
	// another value, "ZZZAB" -> "XXXAB" holding "XAB"); each replacement
	// turns at least one byte other than X into X, so this ends. A value
	// made of X alone is already what it would become, and is skipped.
	up := []byte(asciiUpper(s))
	b := []byte(s)
	for changed := true; changed; {
		changed = false
		for _, t := range toks {
			if strings.Trim(t, "X") == "" {
				continue
			}
			for from := 0; ; {
				i := bytes.Index(up[from:], []byte(t))
				if i < 0 {
					break
				}
				i += from
				for k := i; k < i+len(t); k++ {
					b[k], up[k] = 'X', 'X'
				}
				from = i + len(t)
				changed = true
			}
		}
	}
	return string(b)
}

// shiftDate shifts a DA value (YYYYMMDD) by the offset, or replaces it.
func (d *Deidentifier) shiftDate(s string) (string, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return "", nil
	}
	if d.opt.Dates == DatesRemove {
		return DummyDate, nil
	}
	t, err := time.Parse("20060102", s[:min(8, len(s))])
	if err != nil {
		// ACR-NEMA 2.0 dates, still met in legacy data (PS3.5 6.2, DA:
		// "YYYY.MM.DD" in earlier versions of the standard).
		t, err = time.Parse("2006.01.02", s[:min(10, len(s))])
	}
	if err != nil {
		// A date that cannot be read cannot be shifted: it is emptied
		// rather than kept (PS3.15 Annex E action Z), and the copy goes on.
		return "", nil
	}
	return t.AddDate(0, 0, d.shift).Format("20060102"), nil
}

// Dataset de-identifies ds in place (see the package documentation). Call
// Collect on every data set of the case first to clean their identifying
// values out of kept descriptions across files.
func (d *Deidentifier) Dataset(ds *dicom.Dataset) error {
	for _, e := range ds.Elements {
		if e.Tag == tag.BurnedInAnnotation {
			if s := stringsOf(e); len(s) > 0 && strings.EqualFold(strings.TrimSpace(s[0]), "YES") {
				return fmt.Errorf("the file declares burned-in annotation (0028,0301) = YES: identity in the pixels cannot be removed")
			}
		}
	}
	d.Collect(ds)
	var patientID string
	for _, e := range ds.Elements {
		if e.Tag == tagPatientID {
			if s := stringsOf(e); len(s) > 0 {
				patientID = strings.TrimSpace(s[0])
			}
		}
	}
	els, err := d.elements(ds.Elements, patientID, true)
	if err != nil {
		return err
	}
	// Record what was done (PS3.15 E.1.1; PS3.3 C.7.1.1).
	method := []string{
		"PS3.15 Annex E Basic Application Confidentiality Profile",
		"Clean Descriptors Option",
		"UIDs replaced by 2.25 hash of salted original",
		"private attributes removed",
	}
	longitudinal := "REMOVED"
	codes := [][3]string{
		{"113100", "DCM", "Basic Application Confidentiality Profile"},
		{"113105", "DCM", "Clean Descriptors Option"},
	}
	if d.opt.Dates == DatesShift {
		method = append(method, "dates shifted by a per-case offset")
		longitudinal = "MODIFIED"
		codes = append(codes, [3]string{"113107", "DCM", "Retain Longitudinal Temporal Information Modified Dates Option"})
	} else {
		method = append(method, "dates replaced by "+DummyDate)
	}
	var items [][]*dicom.Element
	for _, c := range codes {
		item, err := newElements(map[tag.Tag][]string{tag.CodeValue: {c[0]}, tag.CodingSchemeDesignator: {c[1]}, tag.CodeMeaning: {c[2]}})
		if err != nil {
			return err
		}
		items = append(items, item)
	}
	add, err := newElements(map[tag.Tag][]string{
		tag.PatientIdentityRemoved: {"YES"},
		tag.DeidentificationMethod: method,
	})
	if err != nil {
		return err
	}
	seq, err := dicom.NewElement(tg(0x0012, 0x0064), items)
	if err != nil {
		return err
	}
	add = append(add, seq)
	if hasPixels(els) {
		lt, err := newElements(map[tag.Tag][]string{tag.LongitudinalTemporalInformationModified: {longitudinal}})
		if err != nil {
			return err
		}
		add = append(add, lt...)
	}
	els = upsert(els, add)
	ds.Elements = els
	return nil
}

func hasPixels(es []*dicom.Element) bool {
	for _, e := range es {
		if e.Tag == tag.PixelData {
			return true
		}
	}
	return false
}

// newElements builds string elements with their dictionary VRs.
func newElements(vals map[tag.Tag][]string) ([]*dicom.Element, error) {
	var out []*dicom.Element
	for t, v := range vals {
		e, err := dicom.NewElement(t, v)
		if err != nil {
			return nil, fmt.Errorf("building %v: %w", t, err)
		}
		out = append(out, e)
	}
	dicomwrite.SortByTag(out)
	return out, nil
}

// upsert replaces elements of es that share a tag with one in add, appends
// the rest and sorts by tag (PS3.5 7.1: ascending order).
func upsert(es, add []*dicom.Element) []*dicom.Element {
	for _, a := range add {
		found := false
		for n, e := range es {
			if e.Tag == a.Tag {
				es[n] = a
				found = true
			}
		}
		if !found {
			es = append(es, a)
		}
	}
	dicomwrite.SortByTag(es)
	return es
}

// elements applies the profile to one level of elements and recurses into
// sequences.
func (d *Deidentifier) elements(es []*dicom.Element, patientID string, top bool) ([]*dicom.Element, error) {
	out := es[:0:0]
	for _, e := range es {
		t := e.Tag
		if tag.IsPrivate(t.Group) {
			continue // private attributes and their creators
		}
		vr := e.RawValueRepresentation
		if t == tagPatientName || t == tagPatientID {
			l := d.label(patientID)
			if t == tagPatientName {
				// Family^given form (PS3.5 6.2.1.1), so validators see a name.
				l = strings.Replace(l, "-", "^", 1)
			}
			if err := setStrings(e, []string{l}); err != nil {
				return nil, err
			}
			out = append(out, e)
			continue
		}
		if act, ok := profile[t]; ok {
			switch act {
			case actRemove:
				continue
			case actEmpty:
				if err := setStrings(e, []string{}); err != nil {
					return nil, err
				}
				out = append(out, e)
				continue
			case actClean:
				s := stringsOf(e)
				c := make([]string, len(s))
				for n := range s {
					c[n] = d.clean(s[n])
				}
				if err := setStrings(e, c); err != nil {
					return nil, err
				}
				out = append(out, e)
				continue
			}
		}
		switch vr {
		case "PN":
			// Every other person name is kept present but empty: several
			// are Type 2 in their modules (Operators' Name in the RT
			// Series, ROI Interpreter in the RT ROI Observations), so
			// removing them would break the IOD.
			if err := setStrings(e, []string{}); err != nil {
				return nil, err
			}
		case "UI":
			s := stringsOf(e)
			r := make([]string, len(s))
			for n := range s {
				r[n] = d.UID(s[n])
			}
			if err := setStrings(e, r); err != nil {
				return nil, err
			}
		case "DA":
			s := stringsOf(e)
			r := make([]string, 0, len(s))
			for _, v := range s {
				nv, err := d.shiftDate(v)
				if err != nil {
					return nil, fmt.Errorf("%v: %w", t, err)
				}
				r = append(r, nv)
			}
			if err := setStrings(e, r); err != nil {
				return nil, err
			}
		case "DT":
			s := stringsOf(e)
			r := make([]string, 0, len(s))
			for _, v := range s {
				v = strings.TrimSpace(v)
				if len(v) < 8 {
					r = append(r, "")
					continue
				}
				nd, err := d.shiftDate(v[:8])
				if err != nil {
					return nil, fmt.Errorf("%v: %w", t, err)
				}
				r = append(r, nd+v[8:])
			}
			if err := setStrings(e, r); err != nil {
				return nil, err
			}
		case "LO", "SH", "ST", "LT", "UT", "UC":
			// Any other kept text is cleaned of identifying values.
			s := stringsOf(e)
			if len(s) > 0 {
				c := make([]string, len(s))
				for n := range s {
					c[n] = d.clean(s[n])
				}
				if err := setStrings(e, c); err != nil {
					return nil, err
				}
			}
		}
		if e.Value != nil && e.Value.ValueType() == dicom.Sequences {
			var items [][]*dicom.Element
			for _, it := range e.Value.GetValue().([]*dicom.SequenceItemValue) {
				sub, err := d.elements(it.GetValue().([]*dicom.Element), patientID, false)
				if err != nil {
					return nil, err
				}
				items = append(items, sub)
			}
			v, err := dicom.NewValue(items)
			if err != nil {
				return nil, err
			}
			e.Value = v // ValueLength is kept: undefined-length sequences stay so
		}
		out = append(out, e)
	}
	dicomwrite.SortByTag(out)
	return out, nil
}

// tg builds a tag from its group and element numbers.
func tg(group, element uint16) tag.Tag { return tag.Tag{Group: group, Element: element} }
