package sim

import (
	"crypto/sha1"
	"encoding/binary"
	"fmt"
	"math/big"
	"os"
	"path/filepath"

	"dosecover/dosemap/dicomwrite"

	"github.com/suyashkumar/dicom"
)

// SOP classes written by the simulator (DICOM PS3.4
// Annex B, PS3.6 Annex A).
const (
	SOPClassMRImage     = "1.2.840.10008.5.1.4.1.1.4"
	SOPClassRTStructure = "1.2.840.10008.5.1.4.1.1.481.3"
	studyComponentSOP   = "1.2.840.10008.3.1.2.3.1" // Detached Study Management, referenced by RTSTRUCT (PS3.3 C.8.8.5)
	implementationLabel = "DOSECOVER_SIM"
	uidNamespacePrefix  = "dosecover-sim/"
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

// elems collects the elements of one data set.
type elems = dicomwrite.Elements

// ds formats a decimal string (VR DS).
var ds = dicomwrite.DS

// pixelElement returns PixelData holding the 16-bit little-endian words of
// px; the writer copies the bytes as they are.
func pixelElement(px []uint16) *dicom.Element {
	buf := make([]byte, 2*len(px))
	for n, v := range px {
		binary.LittleEndian.PutUint16(buf[2*n:], v)
	}
	return dicomwrite.PixelData(buf)
}

// encode returns the bytes of a DICOM Part 10 file (explicit VR little
// endian) with the given data set; file meta information is added here.
func encode(sopClass, sopInstance string, body elems) ([]byte, error) {
	return dicomwrite.Encode(dicomwrite.Implementation{ClassUID: implementationUID, VersionName: implementationLabel}, sopClass, sopInstance, body)
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
