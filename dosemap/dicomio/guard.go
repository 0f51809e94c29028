package dicomio

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dosecover/dosemap/safefile"
)

// This file holds the guarded entry points that every part of dosecover
// uses to recognise and parse a DICOM file (the reader of a case folder,
// de-identification and the discovery of an audit): a file is recognised
// by its first bytes (IsDICOM), opened without ever blocking on a FIFO or
// a device (only regular files are read), read only up to its pixel data
// unless the pixel data are asked for, and walked element by element
// before the DICOM library sees it, so that a declared length larger than
// the file or than the enclosing item, or sequences nested more than 64
// deep, are refused with a message instead of allocating what they
// declare or exhausting the stack.

// maxHeadBytes bounds what is read of a file before its pixel data (or of
// a file without pixel data): the attributes of a session's largest
// enhanced multi-frame file or structure set take a few megabytes.
const maxHeadBytes = 256 << 20

// maxWholeFile bounds a file read whole with its pixel data (ParseFile
// with pixels): larger native pixel data than Rows × Columns × frames ×
// bits require are refused before they are read.
const maxWholeFile = 1 << 30

// dicomVRs are the value representations of DICOM PS3.5 section 6.2.
var dicomVRs = map[string]bool{
	"AE": true, "AS": true, "AT": true, "CS": true, "DA": true, "DS": true, "DT": true,
	"FL": true, "FD": true, "IS": true, "LO": true, "LT": true, "OB": true, "OD": true,
	"OF": true, "OL": true, "OV": true, "OW": true, "PN": true, "SH": true, "SL": true,
	"SQ": true, "SS": true, "ST": true, "SV": true, "TM": true, "UC": true, "UI": true,
	"UL": true, "UN": true, "UR": true, "US": true, "UT": true, "UV": true,
}

// IsDICOM reports whether head (the first 132 bytes of a file, or all of a
// shorter file) looks like DICOM: either the 128-byte preamble followed by
// "DICM" (DICOM PS3.10 section 7.1), or, for files written without the
// preamble and meta header, a first data element of group 0002 or 0008 in
// explicit VR (little or big endian) or implicit VR little endian with a
// plausible length.
func IsDICOM(head []byte) bool {
	if len(head) >= 132 && bytes.Equal(head[128:132], []byte("DICM")) {
		return true
	}
	if len(head) < 8 {
		return false
	}
	gLE := binary.LittleEndian.Uint16(head)
	eLE := binary.LittleEndian.Uint16(head[2:])
	gBE := binary.BigEndian.Uint16(head)
	vr := string(head[4:6])
	if (gLE == 0x0002 || gLE == 0x0008 || gBE == 0x0002 || gBE == 0x0008) && dicomVRs[vr] {
		return true
	}
	if gLE == 0x0002 || gLE == 0x0008 {
		length := binary.LittleEndian.Uint32(head[4:])
		// Implicit VR: the first element is a group length, a character set
		// or a type/UID attribute, all short.
		return eLE < 0x0100 && length > 0 && length < 1024 && length%2 == 0
	}
	return false
}

// SpecialFileReason says why a file of type mode (fs.FileMode.Type) is not
// read: "" for a regular file.
func SpecialFileReason(mode fs.FileMode) string {
	switch {
	case mode.IsRegular():
		return ""
	case mode&fs.ModeDir != 0:
		return "a folder, not a file"
	case mode&fs.ModeNamedPipe != 0:
		return "a named pipe (FIFO), not a regular file: not read"
	case mode&fs.ModeSocket != 0:
		return "a socket, not a regular file: not read"
	case mode&fs.ModeDevice != 0:
		return "a device, not a regular file: not read"
	case mode&fs.ModeSymlink != 0:
		return "a symbolic link, not followed"
	}
	return "not a regular file: not read"
}

// LinkReason says why the symbolic link at p is not used: "" when it leads
// to a regular file. Loops and dangling links are named as such.
func LinkReason(p string) string {
	st, err := os.Stat(p)
	switch {
	case err == nil && st.Mode().IsRegular():
		return ""
	case err == nil && st.IsDir():
		return "symbolic link to a folder, not followed"
	case err == nil:
		return "symbolic link to " + SpecialFileReason(st.Mode().Type())
	case errors.Is(err, fs.ErrNotExist):
		return "dangling symbolic link (its target does not exist)"
	}
	var pe *fs.PathError
	if errors.As(err, &pe) && pe.Err.Error() == "too many levels of symbolic links" {
		return "symbolic link loop (the link leads back to itself)"
	}
	return "symbolic link that cannot be followed (" + safefile.Reason(err) + ")"
}

// SniffFile reports whether the file at path is a regular file that starts
// like DICOM (IsDICOM). It never blocks: a FIFO or a device gives false and
// an error saying what it is.
func SniffFile(path string) (bool, error) {
	f, err := openCaseFile(path)
	if err != nil {
		return false, err
	}
	defer f.Close()
	_, _, mode, err := f.stat()
	if err != nil {
		return false, err
	}
	if r := SpecialFileReason(mode); r != "" {
		return false, errors.New(r)
	}
	head := make([]byte, 132)
	n, err := io.ReadFull(f, head)
	if err != nil && err != io.EOF && err != io.ErrUnexpectedEOF {
		return false, err
	}
	return IsDICOM(head[:n]), nil
}

// readHead reads the start of the regular file f (of size bytes) up to the
// value of its top-level pixel data, in reads that double from 1 MiB, and
// never more than maxHeadBytes. When the pixel data element is found, the
// data returned end at its value, with its length field set to zero (so
// that a parser reads an empty value), and pixPos and pixLen say where the
// value lies in the file and how long it is declared. A file without
// top-level native pixel data is returned whole (pixPos 0).
//
// Encapsulated (compressed) top-level pixel data end the read with a
// "unsupported compression" skip, or, with keepEncapsulated, give the
// head up to that element's header and pixPos -1.
func readHead(f caseFile, size int64, keepEncapsulated bool) (data []byte, pixPos, pixLen int, err error) {
	n := int(min(size, 1<<20))
	for {
		if cap(data) < n {
			grown := make([]byte, len(data), n)
			copy(grown, data)
			data = grown
		}
		m, rerr := f.ReadAt(data[len(data):n], int64(len(data)))
		data = data[:len(data)+m]
		if rerr != nil && rerr != io.EOF {
			return nil, 0, 0, rerr
		}
		if len(data) >= 132 && !IsDICOM(data[:132]) || len(data) < 132 && !IsDICOM(data) {
			return nil, 0, 0, errNotDICOM
		}
		w := &walker{data: data, explicit: true, bo: binary.LittleEndian, stopAtPixels: true}
		werr := w.run(walkStart(data))
		switch {
		case errors.Is(werr, errStopped) && w.encapsulated && keepEncapsulated:
			return data[:w.pixelHdr], -1, 0, nil
		case errors.Is(werr, errStopped) && w.encapsulated:
			return nil, 0, 0, skip("unsupported compression: %s (encapsulated pixel data)", syntaxName(w.syntax))
		case errors.Is(werr, errStopped):
			head := data[:w.pixelPos]
			// Zero the length field: 4 bytes in implicit VR and for the
			// long explicit VRs (OB, OW...), else 2.
			if w.pixelPos-w.pixelHdr == 12 || w.pixelPos-w.pixelHdr == 8 && !w.explicit {
				copy(head[w.pixelPos-4:], []byte{0, 0, 0, 0})
			} else {
				copy(head[w.pixelPos-2:], []byte{0, 0})
			}
			return head, w.pixelPos, w.pixelLen, nil
		case m == 0 || int64(len(data)) >= size:
			return data, 0, 0, nil // all of it: the caller's parse says what is wrong
		case werr != nil && !isLengthError(werr):
			return data, 0, 0, nil // malformed in its head: the caller's parse says how
		case len(data) >= maxHeadBytes:
			why := "no pixel data"
			if werr != nil {
				why = werr.Error()
			}
			return nil, 0, 0, skip("the attributes before the pixel data take more than %d MB (%s): not read", maxHeadBytes>>20, why)
		}
		n = int(min(size, int64(2*len(data)), maxHeadBytes))
	}
}

// walkStart is where the elements of data start: after the preamble and
// "DICM" when present.
func walkStart(data []byte) int {
	if len(data) >= 132 && string(data[128:132]) == "DICM" {
		return 132
	}
	return 0
}

// isLengthError reports whether err is a declared length that does not fit
// in the data (or a header cut short by the end of the data).
func isLengthError(err error) bool {
	var le *lengthError
	return errors.As(err, &le) || err != nil && bytes.Contains([]byte(err.Error()), []byte("cut short"))
}

// ParseFile is the guarded parse of one DICOM file for the parts of
// dosecover that need the whole data set as the DICOM library gives it
// (de-identification, the study of a folder). The file must be regular
// (never blocks on a FIFO); it is recognised by IsDICOM; its element
// lengths and nesting are walked first (see checkLengths); its transfer
// syntax must be one whose data set the library reads (not deflated); and
// panics of the library are returned as errors. With pixels false the
// file is read only up to its pixel data, which come back empty. With
// pixels true native pixel data longer than Rows × Columns × frames ×
// bits require (plus one padding byte) are refused, as are files over 1
// GB. Every error is a plain sentence without the file's path.
func ParseFile(path string, pixels bool) (dicom.Dataset, error) {
	f, err := openCaseFile(path)
	if err != nil {
		return dicom.Dataset{}, errors.New(safefile.Reason(err))
	}
	defer f.Close()
	size, _, mode, err := f.stat()
	if err != nil {
		return dicom.Dataset{}, errors.New(safefile.Reason(err))
	}
	if r := SpecialFileReason(mode); r != "" {
		return dicom.Dataset{}, errors.New(r)
	}
	if size == 0 {
		return dicom.Dataset{}, errors.New("empty file")
	}
	data, pixPos, pixLen, err := readHead(f, size, true)
	if errors.Is(err, errNotDICOM) {
		return dicom.Dataset{}, errors.New("not a DICOM file (no DICM marker and no DICOM element at the start)")
	}
	if err != nil {
		return dicom.Dataset{}, errors.New(trimSkip(err))
	}
	if pixPos == 0 {
		return parseGuarded(data)
	}
	if pixPos < 0 {
		// Encapsulated pixel data: without pixels the data set ends
		// before them; with pixels the file is read whole (its fragments
		// are walked before they are parsed).
		if !pixels {
			return parseGuarded(data)
		}
		return readWhole(f, size)
	}
	// The head is parsed first to learn how many bytes the pixel data may
	// take; only then is the rest read.
	ds, err := parseGuarded(data)
	if err != nil {
		return dicom.Dataset{}, err
	}
	// Without usable image attributes the pixel data may take 1 MiB.
	need, nerr := pixelBytesNeeded(elems(ds.Elements))
	if pixelDataTooLong(int64(pixLen), need) {
		if nerr != nil {
			return dicom.Dataset{}, fmt.Errorf("implausible pixel data: PixelData (7fe0,0010) declares %d bytes with %v; not read", pixLen, nerr)
		}
		return dicom.Dataset{}, fmt.Errorf("implausible pixel data: PixelData (7fe0,0010) declares %d bytes but its Rows, Columns, NumberOfFrames, SamplesPerPixel and BitsAllocated need %d; not read", pixLen, need)
	}
	if pixels {
		if int64(pixPos)+int64(pixLen) > size {
			return dicom.Dataset{}, fmt.Errorf("truncated: PixelData (7fe0,0010) declares %d bytes but the file ends %d bytes after its start", pixLen, size-int64(pixPos))
		}
		return readWhole(f, size)
	}
	return ds, nil
}

// readWhole reads and parses (parseGuarded) all of f, of size bytes; files
// over maxWholeFile are refused.
func readWhole(f caseFile, size int64) (dicom.Dataset, error) {
	if size > maxWholeFile {
		return dicom.Dataset{}, fmt.Errorf("file of %d bytes: files over %d MB are not read whole", size, maxWholeFile>>20)
	}
	whole := make([]byte, size)
	n, err := f.ReadAt(whole, 0)
	if err != nil && err != io.EOF {
		return dicom.Dataset{}, errors.New(safefile.Reason(err))
	}
	return parseGuarded(whole[:n])
}

// trimSkip returns the reason of a skip error, or the error's text.
func trimSkip(err error) string {
	var fe *fileError
	if errors.As(err, &fe) {
		return fe.Reason
	}
	return safefile.Reason(err)
}

// ParseBytes is ParseFile for a whole file already in memory (with its
// pixel data, which are not size-checked here: the caller holds them).
func ParseBytes(data []byte) (dicom.Dataset, error) {
	if len(data) == 0 {
		return dicom.Dataset{}, errors.New("empty file")
	}
	if !IsDICOM(data[:min(len(data), 132)]) {
		return dicom.Dataset{}, errors.New("not a DICOM file (no DICM marker and no DICOM element at the start)")
	}
	return parseGuarded(data)
}

// parseGuarded walks data (lengths, nesting, transfer syntax) and then
// parses it with the DICOM library, its panics recovered.
func parseGuarded(data []byte) (dicom.Dataset, error) {
	w, err := walk(data, nil)
	if ts, ok := transferSyntaxes[w.syntax]; ok && !ts.supported && w.syntax == "1.2.840.10008.1.2.1.99" {
		return dicom.Dataset{}, fmt.Errorf("unsupported transfer syntax: %s (%s) is not read", ts.name, w.syntax)
	}
	if err != nil {
		if isLengthError(err) {
			return dicom.Dataset{}, fmt.Errorf("truncated or corrupt: %v", err)
		}
		return dicom.Dataset{}, fmt.Errorf("corrupt: %v", err)
	}
	ds, panicked, err := parse(data, []dicom.ParseOption{dicom.SkipProcessingPixelDataValue(), dicom.AllowUnknownSpecificCharacterSet()})
	if panicked {
		return dicom.Dataset{}, errors.New("unreadable: malformed DICOM data the parser cannot read (it stopped on an internal check)")
	}
	if err != nil {
		return dicom.Dataset{}, fmt.Errorf("unreadable: %s", libraryReason(err))
	}
	return ds, nil
}

// libraryReason words an error of the DICOM library without its internals.
func libraryReason(err error) string {
	msg := err.Error()
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) || bytes.Contains([]byte(msg), []byte("EOF")) ||
		bytes.Contains([]byte(msg), []byte("not enough bytes")) {
		return "the file ends early"
	}
	if errors.Is(err, dicom.ErrorMetaElementGroupLength) {
		return "the file meta information does not start with its group length"
	}
	if i := bytes.Index([]byte(msg), []byte("http")); i >= 0 {
		msg = msg[:i]
	}
	return msg
}

// pixelBytesNeeded is Rows × Columns × NumberOfFrames × BitsAllocated / 8
// of a data set, refusing implausible sizes.
func pixelBytesNeeded(es elems) (int64, error) {
	rows, _ := es.int(tag.Rows)
	cols, _ := es.int(tag.Columns)
	bits, _ := es.int(tag.BitsAllocated)
	spp, ok := es.int(tag.SamplesPerPixel)
	if !ok || spp < 1 {
		spp = 1
	}
	nf, ok := es.int(tag.NumberOfFrames)
	if !ok || nf < 1 {
		nf = 1
	}
	if rows <= 0 || cols <= 0 || bits <= 0 || bits > 64 || spp > 4 || nf > 1<<20 || rows*cols > 1<<26 {
		return 0, fmt.Errorf("implausible image size: Rows %d, Columns %d, NumberOfFrames %d, BitsAllocated %d, SamplesPerPixel %d", rows, cols, nf, bits, spp)
	}
	return (int64(rows)*int64(cols)*int64(nf)*int64(spp)*int64(bits) + 7) / 8, nil
}

// pixelDataTooLong reports whether native pixel data of declared bytes are
// far more than the need bytes Rows × Columns × frames × bits call for:
// more than twice as many plus 1 MiB (room for padding and writers that
// add a little). Such a file is named and skipped, never read whole.
func pixelDataTooLong(declared, need int64) bool { return declared > 2*need+1<<20 }
