package dicomio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"dosecover/dosemap"

	"dosecover/dosemap/safefile"
	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// Standard attributes that the library's tag table names differently or
// that are read from functional-group items.
var (
	tagTemporalPositionIndex = tag.Tag{Group: 0x0020, Element: 0x9128}
	tagFrameAcqDateTime      = tag.Tag{Group: 0x0018, Element: 0x9074}
	tagFrameRefDateTime      = tag.Tag{Group: 0x0018, Element: 0x9151}
	tagEffectiveEchoTime     = tag.Tag{Group: 0x0018, Element: 0x9082}
	tagMREchoSequence        = tag.Tag{Group: 0x0018, Element: 0x9114}
	tagMRImageFrameType      = tag.Tag{Group: 0x0018, Element: 0x9226}
	tagFrameType             = tag.Tag{Group: 0x0008, Element: 0x9007}
	tagComplexImageComponent = tag.Tag{Group: 0x0008, Element: 0x9208}
	tagPixelValueTransform   = tag.Tag{Group: 0x0028, Element: 0x9145}
	tagRWVMapping            = tag.Tag{Group: 0x0040, Element: 0x9096}
	tagRWVSlope              = tag.Tag{Group: 0x0040, Element: 0x9225}
	tagRWVIntercept          = tag.Tag{Group: 0x0040, Element: 0x9224}
	tagLUTLabel              = tag.Tag{Group: 0x0040, Element: 0x9210}
	tagUnitsCodeSequence     = tag.Tag{Group: 0x0040, Element: 0x08EA}
	tagCodeValue             = tag.Tag{Group: 0x0008, Element: 0x0100}
	tagPerFrameGroups        = tag.Tag{Group: 0x5200, Element: 0x9230}
	tagSharedGroups          = tag.Tag{Group: 0x5200, Element: 0x9229}
	tagPlanePosition         = tag.Tag{Group: 0x0020, Element: 0x9113}
	tagPlaneOrientation      = tag.Tag{Group: 0x0020, Element: 0x9116}
	tagFrameContent          = tag.Tag{Group: 0x0020, Element: 0x9111}
	tagStackID               = tag.Tag{Group: 0x0020, Element: 0x9056}
	tagInStackPosition       = tag.Tag{Group: 0x0020, Element: 0x9057}
	tagPixelMeasures         = tag.Tag{Group: 0x0028, Element: 0x9110}
	tagGridFrameOffset       = tag.Tag{Group: 0x3004, Element: 0x000C}
	tagFloatPixelData        = tag.Tag{Group: 0x7FE0, Element: 0x0008}
	tagDoubleFloatPixelData  = tag.Tag{Group: 0x7FE0, Element: 0x0009}
)

// transferSyntaxes names the transfer syntaxes dosecover recognises; those
// marked false have compressed pixel data the DICOM library cannot decode.
var transferSyntaxes = map[string]struct {
	name      string
	supported bool
}{
	"1.2.840.10008.1.2":         {"Implicit VR Little Endian", true},
	"1.2.840.10008.1.2.1":       {"Explicit VR Little Endian", true},
	"1.2.840.10008.1.2.2":       {"Explicit VR Big Endian", true},
	"1.2.840.10008.1.2.1.99":    {"Deflated Explicit VR Little Endian", false},
	"1.2.840.10008.1.2.4.50":    {"JPEG Baseline (Process 1)", false},
	"1.2.840.10008.1.2.4.51":    {"JPEG Extended (Process 2 & 4)", false},
	"1.2.840.10008.1.2.4.57":    {"JPEG Lossless, Non-Hierarchical (Process 14)", false},
	"1.2.840.10008.1.2.4.70":    {"JPEG Lossless, First-Order Prediction (Process 14 SV1)", false},
	"1.2.840.10008.1.2.4.80":    {"JPEG-LS Lossless", false},
	"1.2.840.10008.1.2.4.81":    {"JPEG-LS Near-Lossless", false},
	"1.2.840.10008.1.2.4.90":    {"JPEG 2000 (Lossless Only)", false},
	"1.2.840.10008.1.2.4.91":    {"JPEG 2000", false},
	"1.2.840.10008.1.2.4.92":    {"JPEG 2000 Part 2 Multi-component (Lossless Only)", false},
	"1.2.840.10008.1.2.4.93":    {"JPEG 2000 Part 2 Multi-component", false},
	"1.2.840.10008.1.2.4.100":   {"MPEG2 Main Profile", false},
	"1.2.840.10008.1.2.4.201":   {"High-Throughput JPEG 2000 (Lossless Only)", false},
	"1.2.840.10008.1.2.4.203":   {"High-Throughput JPEG 2000", false},
	"1.2.840.10008.1.2.5":       {"RLE Lossless", false},
	"1.2.840.10008.1.2.1.98":    {"Encapsulated Uncompressed Explicit VR Little Endian", false},
	"1.2.840.10008.1.2.4.201.1": {"High-Throughput JPEG 2000", false},
}

// tagInError finds the first "(gggg,eeee)" in a parser error.
var tagInError = regexp.MustCompile(`\(([0-9a-fA-F]{4}),([0-9a-fA-F]{4})\)`)

// syntaxName returns the name of transfer syntax uid, or the UID itself.
func syntaxName(uid string) string {
	if s, ok := transferSyntaxes[uid]; ok {
		return s.name
	}
	return "transfer syntax " + uid
}

// rwv is one item of the Real World Value Mapping Sequence (0040,9096):
// real value = Slope*stored + Intercept (PS3.3 C.7.6.16.2.11).
type rwv struct {
	Slope, Intercept float64
	Units            string // MeasurementUnitsCodeSequence CodeValue (UCUM)
	Label            string // LUTLabel
}

// clockTime is a frame time as written: Day is days since 1970-01-01 (or
// -1 when the file gives no date), Sec seconds after midnight.
type clockTime struct {
	Day int
	Sec float64
	OK  bool
}

// abs returns seconds since 1970-01-01 (seconds of day when undated).
func (c clockTime) abs() float64 {
	if c.Day < 0 {
		return c.Sec
	}
	return float64(c.Day)*86400 + c.Sec
}

// frameMeta is what dosecover needs of one image frame: one single-frame
// file, or one frame of an enhanced multi-frame file.
type frameMeta struct {
	IPP         dosemap.Vec3
	Row, Col    dosemap.Vec3 // ImageOrientationPatient triplets
	Spacing     [2]float64   // PixelSpacing: row spacing, column spacing (mm)
	Thickness   float64
	TemporalPos int    // TemporalPositionIdentifier / TemporalPositionIndex; 0 none
	StackID     string // StackID (0020,9056) of the Frame Content; "" none
	InStackPos  int    // InStackPositionNumber (0020,9057); 0 none
	Time        clockTime
	Component   string // "P", "M", "R", "I" or ""
	Slope       float64
	Intercept   float64
	RWV         []rwv
	TE          float64 // s; 0 unknown
	badTE       float64 // an EffectiveEchoTime (ms) out of range, for the message
}

// fileInfo is the result of reading one file.
type fileInfo struct {
	Path                               string
	SOPClass, SOPInstance              string
	Modality                           string
	StudyUID, SeriesUID                string
	SeriesDescription                  string
	StudyDescription                   string
	SeriesNumber, AcquisitionNumber    int
	FrameOfRef                         string
	ImageType                          []string
	Rows, Cols                         int
	BitsAllocated, BitsStored, HighBit int
	PixelRep, Samples                  int
	B0, TE                             float64 // T, s; 0 when absent
	WindowCenter, WindowWidth          float64
	Patient                            dosemap.Patient
	Syntax                             string
	BigEndian                          bool
	Frames                             []frameMeta
	Pixels                             []byte    // raw pixel data when read
	firstFrame                         int       // frame number of the first frame in Pixels
	pooled                             bool      // Pixels is a reused buffer (see decodeFile)
	Size                               int64     // file size when the attributes were read
	ModTime                            time.Time // modification time then (zero when not read from a file)
	PixelPos, PixelLen                 int       // where the native pixel data lie in the file (0 unknown)
	Structures                         *structureSet
	IsImage                            bool
	TemporalPositions                  int // NumberOfTemporalPositions (0020,0105); 0 absent
}

// fileError is a reason a file is skipped.
type fileError struct{ Reason string }

func (e *fileError) Error() string { return e.Reason }

func skip(format string, a ...any) error { return &fileError{fmt.Sprintf(format, a...)} }

// looksLikeDICOM reports whether data starts with the DICM preamble or with
// a plausible first element of a preamble-less dataset (group 0002 or 0008,
// either byte order).
func looksLikeDICOM(data []byte) bool {
	if len(data) >= 132 && string(data[128:132]) == "DICM" {
		return true
	}
	if len(data) < 8 {
		return false
	}
	le := binary.LittleEndian.Uint16(data)
	be := binary.BigEndian.Uint16(data)
	for _, g := range []uint16{0x0002, 0x0008} {
		if le == g || be == g {
			return true
		}
	}
	return false
}

// readFile reads the file at path. With pixels false it stops at the pixel
// data (which is skipped, not decoded); with pixels true the raw pixel
// bytes are kept in fileInfo.Pixels. Panics inside the DICOM library are
// recovered and reported as an unreadable file.
//
// The file is opened once: its start is looked at first, so that a large
// file that is not DICOM (a video, an archive) is never read whole. Without
// pixels the bytes go into a reused buffer (nothing read keeps a reference
// to them), so a pass over thousands of files allocates little.
func readFile(path string, pixels bool) (fi *fileInfo, err error) {
	f, err := openCaseFile(path)
	if err != nil {
		return nil, skip("cannot read: %s", safefile.Reason(err))
	}
	defer f.Close()
	fsize, mod, mode, err := f.stat()
	if err != nil {
		return nil, skip("cannot read: %s", safefile.Reason(err))
	}
	if r := SpecialFileReason(mode); r != "" {
		return nil, skip("%s", r)
	}
	// readBytes recovers panics of the DICOM library; this second guard
	// keeps any other failure on one file from stopping the whole case.
	defer func() {
		if r := recover(); r != nil {
			fi = nil
			err = skip("unreadable: internal error while reading (%v)", r)
		}
	}()
	if fsize > maxPooledFile {
		// A large file is read only up to its pixel data, whatever it
		// declares; the frames used are read later by loadPixels.
		data, pixPos, pixLen, err := readHead(f, fsize, false)
		if errors.Is(err, errNotDICOM) {
			return nil, skip("not a DICOM file (no DICM marker and no DICOM element at the start)")
		}
		var fe *fileError
		if errors.As(err, &fe) {
			return nil, err
		}
		if err != nil {
			return nil, skip("cannot read: %s", safefile.Reason(err))
		}
		declared := -1
		if pixPos > 0 {
			declared = pixLen
		}
		fi, err = readBytesDeclared(path, data, false, fastAttrs, declared)
		if err != nil {
			return nil, err
		}
		fi.Size, fi.ModTime = fsize, mod
		if pixels && fi.IsImage && len(fi.Frames) > 0 {
			return fi.loadPixels(nil, 0, len(fi.Frames)-1)
		}
		return fi, nil
	}
	var data []byte
	var pooled *[]byte
	size := int(fsize)
	if !pixels && size > 0 {
		pooled = fileBuffers.Get().(*[]byte)
		if cap(*pooled) < size+1 {
			*pooled = make([]byte, 0, max(size+1, 64<<10))
		}
		data = (*pooled)[:0]
		defer func() {
			*pooled = (*pooled)[:0]
			fileBuffers.Put(pooled)
		}()
	} else {
		data = make([]byte, 0, size+1)
	}
	if size > 0 {
		// A small file is read in one call (its size is known).
		data, err = readSmall(f, data, size)
	} else {
		data, err = readHeadThenRest(f, data)
	}
	if err != nil {
		if errors.Is(err, errNotDICOM) {
			return nil, skip("not a DICOM file (no DICM marker and no DICOM element at the start)")
		}
		return nil, skip("cannot read: %s", safefile.Reason(err))
	}
	if pooled != nil {
		*pooled = data[:0]
	}
	fi, err = readBytes(path, data, pixels)
	if fi != nil {
		fi.ModTime = mod
	}
	return fi, err
}

// maxPooledFile is the largest file read into a reused buffer; larger ones
// (multi-frame series) get their own.
const maxPooledFile = 4 << 20

// fileBuffers holds the reused read buffers of readFile.
var fileBuffers = sync.Pool{New: func() any { b := make([]byte, 0, 64<<10); return &b }}

// errNotDICOM is returned by readHeadThenRest for a file whose start is not
// DICOM.
var errNotDICOM = errors.New("not DICOM")

// readSmall appends the size bytes of f to data in one read when it can
// (errNotDICOM if the start does not look like DICOM). A file that grew
// since Stat is read to its end.
func readSmall(f caseFile, data []byte, size int) ([]byte, error) {
	if cap(data)-len(data) < size+1 {
		data = slices.Grow(data, size+1)
	}
	buf := data[len(data) : len(data)+size+1]
	m, err := io.ReadAtLeast(f, buf, size)
	if err != nil && err != io.EOF && err != io.ErrUnexpectedEOF {
		return nil, err
	}
	data = data[:len(data)+m]
	if m > 0 && !looksLikeDICOM(data) {
		return nil, errNotDICOM
	}
	if m <= size {
		return data, nil // all of it (or it shrank: the parser says where it ends)
	}
	return readHeadThenRest(f, data) // it grew: read on
}

// readHeadThenRest appends the first 132 bytes of f to data, checks that
// they look like DICOM (errNotDICOM if not), then appends the rest of f.
func readHeadThenRest(f caseFile, data []byte) ([]byte, error) {
	if cap(data)-len(data) < 132 {
		data = slices.Grow(data, 132)
	}
	head := data[len(data) : len(data)+132]
	m, err := io.ReadFull(f, head)
	if err != nil && err != io.EOF && err != io.ErrUnexpectedEOF {
		return nil, err
	}
	data = data[:len(data)+m]
	if m > 0 && !looksLikeDICOM(data) {
		return nil, errNotDICOM
	}
	if m < 132 {
		return data, nil
	}
	for {
		if len(data) == cap(data) {
			data = slices.Grow(data, 1)[:len(data)]
		}
		n, err := f.Read(data[len(data):cap(data)])
		data = data[:len(data)+n]
		if err == io.EOF {
			return data, nil
		}
		if err != nil {
			return nil, err
		}
	}
}

// parse runs the DICOM library on data, turning its panics into errors.
func parse(data []byte, opts []dicom.ParseOption) (ds dicom.Dataset, panicked bool, err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("%v", r)
			panicked = true
		}
	}()
	ds, err = dicom.Parse(bytes.NewReader(data), int64(len(data)), nil, opts...)
	return ds, false, err
}

// readBytes parses one file already in memory; see readFile. Panics of the
// DICOM library are recovered; the code of this package is not guarded
// here, so that fuzzing finds its faults.
func readBytes(path string, data []byte, pixels bool) (fi *fileInfo, err error) {
	return readBytesWith(path, data, pixels, fastAttrs)
}

// readBytesWith is readBytes with the direct attribute reader on or off.
func readBytesWith(path string, data []byte, pixels, useFast bool) (fi *fileInfo, err error) {
	return readBytesDeclared(path, data, pixels, useFast, -1)
}

// readBytesDeclared is readBytesWith for data that may be only the head of
// a file (see readHead): declared, when not negative, is the length the
// top-level pixel data declare in the file, whose value data do not hold.
func readBytesDeclared(path string, data []byte, pixels, useFast bool, declared int) (fi *fileInfo, err error) {
	if len(data) == 0 {
		return nil, skip("empty file (0 bytes)")
	}
	if !looksLikeDICOM(data) {
		return nil, skip("not a DICOM file (no DICM marker and no DICOM element at the start)")
	}
	w, err := walk(data, nil)
	syntax := w.syntax
	if ts, ok := transferSyntaxes[syntax]; ok && !ts.supported {
		return nil, skip("unsupported compression: %s (%s)", ts.name, syntax)
	}
	if err != nil {
		// The DICOM library would misread such a file, possibly
		// allocating whatever a corrupt length declares: it is not parsed.
		var le *lengthError
		if errors.As(err, &le) {
			return nil, skip("truncated or corrupt: %v", err)
		}
		return nil, skip("corrupt: %v", err)
	}
	var es elems
	var perr error
	fast := false
	if useFast {
		// Plain images in little-endian syntaxes: read directly (see
		// fastattrs.go); everything else goes through the library.
		es, fast = fastElems(data, pixels)
	}
	if !fast {
		opts := []dicom.ParseOption{dicom.AllowMismatchPixelDataLength(), dicom.AllowUnknownSpecificCharacterSet()}
		if pixels {
			opts = append(opts, dicom.SkipProcessingPixelDataValue())
		} else {
			opts = append(opts, dicom.SkipPixelData())
		}
		var ds dicom.Dataset
		var panicked bool
		ds, panicked, perr = parse(data, opts)
		if panicked {
			// The library's own failure (e.g. an index out of range) means
			// nothing to the user; the cause is malformed data.
			return nil, skip("unreadable: malformed DICOM data the parser cannot read (it stopped on an internal check)")
		}
		es = elems(ds.Elements)
	}
	if s := es.str(tag.TransferSyntaxUID); s != "" {
		syntax = s
	}
	if ts, ok := transferSyntaxes[syntax]; ok && !ts.supported {
		return nil, skip("unsupported compression: %s (%s)", ts.name, syntax)
	}
	if perr != nil {
		if len(es) == 0 {
			if errors.Is(perr, dicom.ErrorMagicWord) || len(data) < 132 {
				return nil, skip("not a DICOM file (%v)", perr)
			}
		}
		msg := perr.Error()
		if errors.Is(perr, io.EOF) || errors.Is(perr, io.ErrUnexpectedEOF) || strings.Contains(msg, "EOF") ||
			strings.Contains(msg, "not enough bytes") || strings.Contains(msg, "exceeds current limit") {
			where := "in the header"
			if m := tagInError.FindStringSubmatch(msg); m != nil {
				var g, e uint16
				fmt.Sscanf(m[1]+" "+m[2], "%x %x", &g, &e)
				where = "inside " + tagName(tag.Tag{Group: g, Element: e})
			} else if len(es) > 0 {
				where = "after " + tagName(es[len(es)-1].Tag)
			}
			return nil, skip("truncated: the file ends early (%s)", where)
		}
		if errors.Is(perr, dicom.ErrorMetaElementGroupLength) {
			return nil, skip("unreadable: the file meta information does not start with its group length %s", tagName(tag.FileMetaInformationGroupLength))
		}
		return nil, skip("unreadable: %v", perr)
	}
	fi = &fileInfo{Path: path, Syntax: syntax, BigEndian: w.bo == binary.BigEndian,
		Size: int64(len(data)), PixelPos: w.pixelPos, PixelLen: w.pixelLen}
	if declared >= 0 {
		fi.PixelLen = declared
	}
	if err := fi.fill(es, pixels); err != nil {
		return nil, err
	}
	return fi, nil
}

// fill extracts the attributes dosecover uses from the top-level dataset.
func (fi *fileInfo) fill(es elems, pixels bool) error {
	fi.SOPClass = es.str(tag.SOPClassUID)
	if fi.SOPClass == "" {
		fi.SOPClass = es.str(tag.MediaStorageSOPClassUID)
	}
	fi.SOPInstance = es.str(tag.SOPInstanceUID)
	fi.Modality = strings.ToUpper(es.str(tag.Modality))
	fi.StudyUID = es.str(tag.StudyInstanceUID)
	fi.SeriesUID = es.str(tag.SeriesInstanceUID)
	fi.SeriesDescription = es.str(tag.SeriesDescription)
	fi.StudyDescription = es.str(tag.StudyDescription)
	fi.SeriesNumber, _ = es.int(tag.SeriesNumber)
	fi.AcquisitionNumber, _ = es.int(tag.AcquisitionNumber)
	fi.TemporalPositions, _ = es.int(tag.NumberOfTemporalPositions)
	fi.FrameOfRef = es.str(tag.FrameOfReferenceUID)
	fi.ImageType = es.strs(tag.ImageType)
	fi.Patient = dosemap.Patient{
		Name:        es.str(tag.PatientName),
		ID:          es.str(tag.PatientID),
		BirthDate:   es.str(tag.PatientBirthDate),
		StudyDate:   es.str(tag.StudyDate),
		Institution: es.str(tag.InstitutionName),
	}
	if b0, ok := es.float(tag.MagneticFieldStrength); ok && b0 != 0 {
		if err := plausible(tag.MagneticFieldStrength, b0, "T", minB0, maxB0); err != nil {
			return err
		}
		fi.B0 = b0
	}
	if te, ok := es.float(tag.EchoTime); ok && te != 0 {
		if err := plausible(tag.EchoTime, te, "ms", minTEms, maxTEms); err != nil {
			return err
		}
		fi.TE = te / 1000
	}
	fi.WindowCenter, _ = es.float(tag.WindowCenter)
	fi.WindowWidth, _ = es.float(tag.WindowWidth)
	if !finite(fi.WindowCenter) || !finite(fi.WindowWidth) {
		fi.WindowCenter, fi.WindowWidth = 0, 0 // display only: the image's own range is used
	}

	if fi.Modality == "RTSTRUCT" || fi.SOPClass == sopRTStructureSet {
		ss, err := parseStructureSet(es)
		if err != nil {
			return err
		}
		fi.Structures = ss
		return nil
	}
	pd := es.find(tag.PixelData)
	if pd == nil {
		if es.find(tagFloatPixelData) != nil || es.find(tagDoubleFloatPixelData) != nil {
			return skip("unsupported pixel data: floating-point pixels (FloatPixelData) are not read")
		}
		return nil // not an image: listed as "other" by the caller
	}
	fi.IsImage = true
	var ok bool
	if fi.Rows, ok = es.int(tag.Rows); !ok || fi.Rows <= 0 {
		return skip("missing tag %s", tagName(tag.Rows))
	}
	if fi.Cols, ok = es.int(tag.Columns); !ok || fi.Cols <= 0 {
		return skip("missing tag %s", tagName(tag.Columns))
	}
	if fi.BitsAllocated, ok = es.int(tag.BitsAllocated); !ok {
		return skip("missing tag %s", tagName(tag.BitsAllocated))
	}
	switch fi.BitsAllocated {
	case 8, 16, 32:
	default:
		return skip("unsupported BitsAllocated %d (8, 16 or 32 are read)", fi.BitsAllocated)
	}
	if fi.BitsStored, ok = es.int(tag.BitsStored); !ok {
		fi.BitsStored = fi.BitsAllocated
	} else if fi.BitsStored < minBitsStored || fi.BitsStored > fi.BitsAllocated {
		// PS3.3 C.7.6.3.1: BitsStored <= BitsAllocated; MR magnitude and
		// phase images store 12 or 16 bits (common practice), so a
		// handful of bits would turn the image into a few levels.
		return skip("implausible %s %d: want %d to BitsAllocated (%d) for MR thermometry and anatomy", tagName(tag.BitsStored), fi.BitsStored, minBitsStored, fi.BitsAllocated)
	}
	if fi.HighBit, ok = es.int(tag.HighBit); !ok || fi.HighBit < fi.BitsStored-1 || fi.HighBit >= fi.BitsAllocated {
		fi.HighBit = fi.BitsStored - 1
	}
	if fi.PixelRep, ok = es.int(tag.PixelRepresentation); ok && fi.PixelRep != 0 && fi.PixelRep != 1 {
		// PS3.3 C.7.6.3.1: 0000H unsigned, 0001H two's complement.
		return skip("invalid %s %d: the standard allows 0 (unsigned) or 1 (two's complement)", tagName(tag.PixelRepresentation), fi.PixelRep)
	}
	if fi.Samples, ok = es.int(tag.SamplesPerPixel); !ok {
		fi.Samples = 1
	}
	if fi.Samples != 1 {
		return skip("colour image (SamplesPerPixel %d): only greyscale images are used", fi.Samples)
	}
	info := dicom.MustGetPixelDataInfo(pd.Value)
	if info.IsEncapsulated {
		return skip("unsupported compression: %s (encapsulated pixel data)", syntaxName(fi.Syntax))
	}
	nf := 1
	if n, ok := es.int(tag.NumberOfFrames); ok && n > 0 {
		nf = n
	}
	if nf > 1<<20 || fi.Rows*fi.Cols > 1<<26 {
		return skip("implausible image size %d×%d×%d", fi.Cols, fi.Rows, nf)
	}
	need := nf * fi.Rows * fi.Cols * fi.BitsAllocated / 8
	declared := int64(pd.ValueLength)
	if fi.PixelPos > 0 {
		declared = int64(fi.PixelLen) // also when only the file's head was read
	}
	if declared < int64(need) {
		return skip("truncated or corrupt: PixelData (7fe0,0010) holds %d bytes, %d×%d×%d frames of %d bits need %d",
			declared, fi.Cols, fi.Rows, nf, fi.BitsAllocated, need)
	}
	if pixelDataTooLong(declared, int64(need)) {
		// Rows × Columns × frames × bits say how large the pixel data
		// are; a file declaring far more is not what it says it is.
		return skip("implausible pixel data: PixelData (7fe0,0010) declares %d bytes but %d×%d×%d frames of %d bits need %d; not read",
			declared, fi.Cols, fi.Rows, nf, fi.BitsAllocated, need)
	}
	if pixels {
		if len(info.UnprocessedValueData) < need {
			return skip("truncated: pixel data holds %d bytes, %d×%d×%d frames need %d",
				len(info.UnprocessedValueData), fi.Cols, fi.Rows, nf, need)
		}
		fi.Pixels = info.UnprocessedValueData[:need]
	}
	return fi.frames(es, nf)
}

// frames fills fi.Frames from the top level (single-frame and classic
// multi-frame images) or from the functional groups of an enhanced image.
func (fi *fileInfo) frames(es elems, nf int) error {
	base := frameMeta{Slope: 1}
	readFrameAttrs(es, &base)
	base.Time = frameTimeOf(es)
	if base.TE == 0 {
		base.TE = fi.TE
	}
	perFrame := es.items(tagPerFrameGroups)
	shared := es.first(tagSharedGroups)
	fi.Frames = make([]frameMeta, nf)
	offsets, hasOffsets := es.floats(tagGridFrameOffset)
	for n := range fi.Frames {
		f := base
		f.RWV = append([]rwv(nil), base.RWV...)
		if shared != nil {
			readGroups(shared, &f)
		}
		if n < len(perFrame) {
			readGroups(perFrame[n], &f)
		}
		if hasOffsets && len(offsets) == nf && perFrame == nil {
			f.IPP = f.IPP.Add(f.Row.Cross(f.Col).Unit().Scale(offsets[n]))
		}
		fi.Frames[n] = f
	}
	if perFrame != nil && len(perFrame) != nf {
		return skip("enhanced image: %d frames but %d items in %s", nf, len(perFrame), tagName(tagPerFrameGroups))
	}
	if err := checkPlanes(es, fi.Frames); err != nil {
		return err
	}
	if fi.TE == 0 && len(fi.Frames) > 0 {
		fi.TE = fi.Frames[0].TE
	}
	return nil
}

// readGroups applies one functional-groups item (shared or per frame).
func readGroups(g elems, f *frameMeta) {
	if it := g.first(tagPlanePosition); it != nil {
		if v, ok := it.floats(tag.ImagePositionPatient); ok && len(v) == 3 {
			f.IPP = dosemap.Vec3{v[0], v[1], v[2]}
		}
	}
	if it := g.first(tagPlaneOrientation); it != nil {
		readOrientation(it, f)
	}
	if it := g.first(tagPixelMeasures); it != nil {
		if v, ok := it.floats(tag.PixelSpacing); ok && len(v) == 2 {
			f.Spacing = [2]float64{v[0], v[1]}
		}
		if v, ok := it.float(tag.SliceThickness); ok {
			f.Thickness = v
		}
	}
	if it := g.first(tagFrameContent); it != nil {
		if v, ok := it.int(tagTemporalPositionIndex); ok {
			f.TemporalPos = v
		}
		if v := it.str(tagStackID); v != "" {
			f.StackID = v
		}
		if v, ok := it.int(tagInStackPosition); ok && v > 0 {
			f.InStackPos = v
		}
		if t, ok := parseDT(it.str(tagFrameAcqDateTime)); ok {
			f.Time = t
		} else if t, ok := parseDT(it.str(tagFrameRefDateTime)); ok && !f.Time.OK {
			f.Time = t
		}
	}
	if it := g.first(tagMRImageFrameType); it != nil {
		if c := componentOf(it.strs(tagFrameType), it.str(tagComplexImageComponent)); c != "" {
			f.Component = c
		}
	}
	if it := g.first(tagPixelValueTransform); it != nil {
		if v, ok := it.float(tag.RescaleSlope); ok {
			f.Slope = v
		}
		if v, ok := it.float(tag.RescaleIntercept); ok {
			f.Intercept = v
		}
	}
	if r := readRWV(g); r != nil {
		f.RWV = r
	}
	if it := g.first(tagMREchoSequence); it != nil {
		if v, ok := it.float(tagEffectiveEchoTime); ok && v != 0 {
			if plausible(tagEffectiveEchoTime, v, "ms", minTEms, maxTEms) == nil {
				f.TE = v / 1000
			} else {
				f.TE = math.NaN() // refused by checkPlanes, naming the value
				f.badTE = v
			}
		}
	}
}

// readFrameAttrs reads the image-plane, pixel-value and type attributes of a
// classic image (or the top level of an enhanced one) into f.
func readFrameAttrs(es elems, f *frameMeta) {
	f.IPP = dosemap.Vec3{math.NaN(), math.NaN(), math.NaN()}
	if v, ok := es.floats(tag.ImagePositionPatient); ok && len(v) == 3 {
		f.IPP = dosemap.Vec3{v[0], v[1], v[2]}
	}
	readOrientation(es, f)
	if v, ok := es.floats(tag.PixelSpacing); ok && len(v) == 2 {
		f.Spacing = [2]float64{v[0], v[1]}
	}
	f.Thickness, _ = es.float(tag.SliceThickness)
	f.TemporalPos, _ = es.int(tag.TemporalPositionIdentifier)
	f.Component = componentOf(es.strs(tag.ImageType), es.str(tagComplexImageComponent))
	if v, ok := es.float(tag.RescaleSlope); ok && v != 0 {
		f.Slope = v
	}
	f.Intercept, _ = es.float(tag.RescaleIntercept)
	f.RWV = readRWV(es)
	if te, ok := es.float(tag.EchoTime); ok && te > 0 && plausible(tag.EchoTime, te, "ms", minTEms, maxTEms) == nil {
		f.TE = te / 1000
	}
}

func readOrientation(es elems, f *frameMeta) {
	if v, ok := es.floats(tag.ImageOrientationPatient); ok && len(v) == 6 {
		f.Row = dosemap.Vec3{v[0], v[1], v[2]}.Unit()
		f.Col = dosemap.Vec3{v[3], v[4], v[5]}.Unit()
	}
}

// componentOf returns the complex component of an image: ImageType value 3
// (or FrameType value 3 in enhanced images) P/PHASE, M/MAGNITUDE, R/REAL,
// I/IMAGINARY, else ComplexImageComponent (0008,9208).
func componentOf(imageType []string, complex string) string {
	if len(imageType) >= 3 {
		switch strings.ToUpper(strings.TrimSpace(imageType[2])) {
		case "P", "PHASE":
			return "P"
		case "M", "MAGNITUDE":
			return "M"
		case "R", "REAL":
			return "R"
		case "I", "IMAGINARY":
			return "I"
		}
	}
	switch strings.ToUpper(strings.TrimSpace(complex)) {
	case "PHASE":
		return "P"
	case "MAGNITUDE":
		return "M"
	case "REAL":
		return "R"
	case "IMAGINARY":
		return "I"
	}
	return ""
}

// readRWV returns the items of the Real World Value Mapping Sequence at this
// level, or nil.
func readRWV(es elems) []rwv {
	var out []rwv
	for _, it := range es.items(tagRWVMapping) {
		r := rwv{Slope: 1, Label: strings.TrimSpace(it.str(tagLUTLabel))}
		if v, ok := it.float(tagRWVSlope); ok {
			r.Slope = v
		}
		r.Intercept, _ = it.float(tagRWVIntercept)
		if u := it.first(tagUnitsCodeSequence); u != nil {
			r.Units = strings.TrimSpace(u.str(tagCodeValue))
		}
		out = append(out, r)
	}
	return out
}

// frameTimeOf returns the acquisition time of a classic image:
// AcquisitionDateTime, else AcquisitionDate (or another date of the file)
// plus AcquisitionTime, else ContentDate plus ContentTime.
func frameTimeOf(es elems) clockTime {
	if t, ok := parseDT(es.str(tag.AcquisitionDateTime)); ok {
		return t
	}
	date := -1
	for _, d := range []tag.Tag{tag.AcquisitionDate, tag.ContentDate, tag.SeriesDate, tag.StudyDate} {
		if day, ok := parseDA(es.str(d)); ok {
			date = day
			break
		}
	}
	if s, ok := parseTM(es.str(tag.AcquisitionTime)); ok {
		return clockTime{Day: date, Sec: s, OK: true}
	}
	if s, ok := parseTM(es.str(tag.ContentTime)); ok {
		if day, ok := parseDA(es.str(tag.ContentDate)); ok {
			date = day
		}
		return clockTime{Day: date, Sec: s, OK: true}
	}
	return clockTime{Day: -1}
}

// Ranges of the values dosecover refuses outside of, with their sources.
const (
	// MagneticFieldStrength (0018,0087), T: clinical MR runs at 0.2 to
	// 7 T and research magnets reach 21.1 T (from memory); 25 T leaves
	// room without letting a corrupt value through.
	minB0, maxB0 = 0.01, 25.0
	// EchoTime (0018,0081), ms: PRF thermometry uses gradient echoes of
	// about 5 to 30 ms (common practice); 0.05 to 1000 ms takes every MR
	// sequence while refusing values that would make the PRF factor
	// 1/(γ·α·B0·TE) blow up or vanish.
	minTEms, maxTEms = 0.05, 1000.0
	// BitsStored (0028,0101): 8 at least (common practice for MR).
	minBitsStored = 8
	// maxPositionMM bounds ImagePositionPatient and contour coordinates:
	// 10 m from the scanner's origin is outside any patient (common
	// practice).
	maxPositionMM = 1e4
	// maxSpacingMM bounds PixelSpacing and SliceThickness (a 1 m pixel
	// is no MR image; common practice).
	maxSpacingMM = 1e3
	// maxMapping bounds rescale and real-world value slopes and
	// intercepts: a 32-bit stored value (below 4.3e9) times 1e20 stays
	// far inside float32 (3.4e38, IEEE 754), so no mapped value is
	// infinite.
	maxMapping = 1e20
)

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// plausible refuses v of attribute t outside [lo, hi] (or not finite),
// naming the attribute, the value and the range.
func plausible(t tag.Tag, v float64, unit string, lo, hi float64) error {
	if finite(v) && v >= lo && v <= hi {
		return nil
	}
	return skip("implausible %s %s %s: want %g to %g %s", tagName(t), strconv.FormatFloat(v, 'g', -1, 64), unit, lo, hi, unit)
}
