package sim

import (
	"bytes"
	"crypto/sha1"
	"encoding/binary"
	"fmt"
	"math/big"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// SOP classes and transfer syntax written by the simulator (DICOM PS3.4
// Annex B, PS3.6 Annex A).
const (
	SOPClassMRImage      = "1.2.840.10008.5.1.4.1.1.4"
	SOPClassRTStructure  = "1.2.840.10008.5.1.4.1.1.481.3"
	explicitVRLittle     = "1.2.840.10008.1.2.1"
	studyComponentSOP    = "1.2.840.10008.3.1.2.3.1" // Detached Study Management, referenced by RTSTRUCT (PS3.3 C.8.8.5)
	implementationLabel  = "DOSECOVER_SIM"
	uidNamespacePrefix   = "dosecover-sim/"
	maxShortStringLength = 16
)

// implementationUID identifies the simulator as the writing implementation
// (PS3.7 Annex D.3.3.2).
var implementationUID = UID("implementation")

// UID returns a deterministic DICOM UID for name: "2.25." followed by the
// decimal value of a name-based (SHA-1, version 5) UUID, the UUID-derived
// form of PS3.5 Annex B.2. The same name always yields the same UID.
func UID(name string) string {
	h := sha1.Sum([]byte(uidNamespacePrefix + name))
	var u [16]byte
	copy(u[:], h[:16])
	u[6] = u[6]&0x0f | 0x50 // version 5
	u[8] = u[8]&0x3f | 0x80 // RFC 4122 variant
	return "2.25." + new(big.Int).SetBytes(u[:]).String()
}

// elems collects the elements of one data set; dataset sorts them by tag as
// PS3.5 §7.1 requires.
type elems []*dicom.Element

func (e *elems) add(t tag.Tag, v any) {
	switch x := v.(type) {
	case string:
		v = []string{x}
	case int:
		v = []int{x}
	case float64:
		v = []float64{x}
	}
	el, err := dicom.NewElement(t, v)
	if err != nil {
		panic(fmt.Sprintf("sim: element %v: %v", t, err)) // programming error: wrong Go type for the VR
	}
	*e = append(*e, el)
}

// ds formats a decimal string (VR DS, at most 16 characters).
func ds(x float64) string {
	for prec := 10; prec > 0; prec-- {
		s := strconv.FormatFloat(x, 'g', prec, 64)
		if len(s) <= maxShortStringLength {
			return s
		}
	}
	return "0"
}

// dsList formats several decimal strings.
func dsList(xs ...float64) []string {
	out := make([]string, len(xs))
	for n, x := range xs {
		out[n] = ds(x)
	}
	return out
}

func (e *elems) seq(t tag.Tag, items ...elems) {
	v := make([][]*dicom.Element, len(items))
	for n, it := range items {
		sort.SliceStable(it, func(a, b int) bool { return tagLess(it[a].Tag, it[b].Tag) })
		v[n] = it
	}
	e.add(t, v)
}

func tagLess(a, b tag.Tag) bool {
	if a.Group != b.Group {
		return a.Group < b.Group
	}
	return a.Element < b.Element
}

// pixelElement returns PixelData holding the 16-bit little-endian words of
// px; the writer copies the bytes as they are.
func pixelElement(px []uint16) *dicom.Element {
	buf := make([]byte, 2*len(px))
	for n, v := range px {
		binary.LittleEndian.PutUint16(buf[2*n:], v)
	}
	el, err := dicom.NewElement(tag.PixelData, dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: buf})
	if err != nil {
		panic(err)
	}
	return el
}

// encode returns the bytes of a DICOM Part 10 file (explicit VR little
// endian) with the given data set; file meta information is added here.
func encode(sopClass, sopInstance string, body elems) ([]byte, error) {
	var all elems
	all.add(tag.FileMetaInformationVersion, []byte{0, 1})
	all.add(tag.MediaStorageSOPClassUID, sopClass)
	all.add(tag.MediaStorageSOPInstanceUID, sopInstance)
	all.add(tag.TransferSyntaxUID, explicitVRLittle)
	all.add(tag.ImplementationClassUID, implementationUID)
	all.add(tag.ImplementationVersionName, implementationLabel)
	all = append(all, body...)
	sort.SliceStable(all, func(a, b int) bool { return tagLess(all[a].Tag, all[b].Tag) })
	var buf bytes.Buffer
	if err := dicom.Write(&buf, dicom.Dataset{Elements: all}); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// writeFileAtomic writes data to path through a temporary file in the same
// folder and a rename, so a reader never sees a half-written file.
func writeFileAtomic(path string, data []byte) error {
	dir, base := filepath.Split(path)
	tmp := filepath.Join(dir, "."+base+".tmp")
	f, err := os.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if _, err := f.Write(data); err != nil {
		f.Close()
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

// joinDS pre-joins coordinates into one backslash-separated DS value
// (ContourData); the library concatenates string lists quadratically.
func joinDS(xs []float64) string {
	var sb strings.Builder
	sb.Grow(12 * len(xs))
	for n, x := range xs {
		if n > 0 {
			sb.WriteByte('\\')
		}
		sb.WriteString(strconv.FormatFloat(x, 'f', 3, 64))
	}
	return sb.String()
}

// addVR adds an element whose tag allows several VRs, with the VR given
// (e.g. SS for signed pixel-value attributes).
func (e *elems) addVR(t tag.Tag, vr string, v any) {
	e.add(t, v)
	(*e)[len(*e)-1].RawValueRepresentation = vr
}
