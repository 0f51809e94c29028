//go:build cgo

package main

import (
	"crypto/rand"
	"encoding/binary"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// badInput is one input a user can get wrong: make builds it from a clone
// of the good test case (or from nothing) and returns the path given on the
// command line; names lists what the messages must mention (the file or
// folder and a word of the problem).
type badInput struct {
	name  string
	make  func(t *testing.T, good string) string
	names []string
	every bool // run report, deidentify and audit too, not only inspect and analyze
}

func badInputs() []badInput {
	edit := func(sub string, which func(files []string) []string, fn func(ds *dicom.Dataset)) func(t *testing.T, good string) string {
		return func(t *testing.T, good string) string {
			dir := cloneCase(t, good)
			for _, p := range which(filesIn(t, dir, sub)) {
				editDICOM(t, p, fn)
			}
			return dir
		}
	}
	first := func(fs []string) []string { return fs[:1] }
	all := func(fs []string) []string { return fs }
	half := func(fs []string) []string { return fs[:len(fs)/2] }
	return []badInput{
		{"missing folder", func(t *testing.T, _ string) string { return filepath.Join(t.TempDir(), "absent") }, []string{"absent", "does not exist"}, true},
		{"file instead of folder", func(t *testing.T, _ string) string {
			p := filepath.Join(t.TempDir(), "notes.txt")
			os.WriteFile(p, []byte("x"), 0o644)
			return p
		}, []string{"notes.txt", "not a folder"}, true},
		{"empty folder", func(t *testing.T, _ string) string { return t.TempDir() }, []string{"holds no files"}, true},
		{"non-DICOM files", func(t *testing.T, _ string) string {
			d := t.TempDir()
			os.WriteFile(filepath.Join(d, "notes.txt"), []byte("treatment notes\n"), 0o644)
			b := make([]byte, 4096)
			rand.Read(b)
			os.WriteFile(filepath.Join(d, "blob.bin"), b, 0o644)
			return d
		}, []string{"notes.txt", "not a DICOM file", "none of its 2 files"}, true},
		{"truncated files", func(t *testing.T, good string) string {
			dir := cloneCase(t, good)
			fs := filesIn(t, dir, "anatomy")
			data, err := os.ReadFile(fs[0])
			if err != nil {
				t.Fatal(err)
			}
			for n, cut := range []int{0, 10, 128, 131, 132, 200, 400, 1000, len(data) / 2, len(data) - 1} {
				replaceFile(t, fs[n], data[:cut])
			}
			return dir
		}, []string{"IM0001.dcm: empty file", "IM0005.dcm: truncated", "IM0008.dcm: no pixel data although its SOP class is MR Image Storage: the file is probably truncated"}, true},
		{"garbage after preamble", func(t *testing.T, good string) string {
			dir := cloneCase(t, good)
			fs := filesIn(t, dir, "anatomy")
			b := make([]byte, 132+2048)
			rand.Read(b)
			copy(b[128:], "DICM")
			replaceFile(t, fs[0], b)
			return dir
		}, []string{"IM0001.dcm"}, true},
		{"file that crashes the DICOM parser", func(t *testing.T, good string) string {
			dir := cloneCase(t, good)
			replaceFile(t, filesIn(t, dir, "anatomy")[0], crashingDICOM())
			return dir
		}, []string{"IM0001.dcm", "malformed DICOM data"}, true},
		{"no ImagePositionPatient in one file", edit("anatomy", first, dropTags(tag.ImagePositionPatient)), []string{"IM0001.dcm", "ImagePositionPatient"}, false},
		{"no ImagePositionPatient in the anatomy", edit("anatomy", all, dropTags(tag.ImagePositionPatient)), []string{"ImagePositionPatient"}, true},
		{"no PixelSpacing in one file", edit("anatomy", first, dropTags(tag.PixelSpacing)), []string{"IM0001.dcm", "PixelSpacing"}, false},
		{"no PixelSpacing in a thermometry series", edit("sonication-01", all, dropTags(tag.PixelSpacing)), []string{"PixelSpacing"}, false},
		{"no ImageOrientationPatient in one file", edit("anatomy", first, dropTags(tag.ImageOrientationPatient)), []string{"IM0001.dcm", "ImageOrientationPatient"}, false},
		{"zero PixelSpacing", edit("anatomy", first, setStrings(tag.PixelSpacing, "0", "0")), []string{"IM0001.dcm", `PixelSpacing (0028,0030) is 0\0 mm`}, false},
		{"negative PixelSpacing", edit("anatomy", first, setStrings(tag.PixelSpacing, "-0.9", "-0.9")), []string{"IM0001.dcm", `is -0.9\-0.9 mm`}, false},
		{"zero ImageOrientationPatient", edit("anatomy", first, setStrings(tag.ImageOrientationPatient, "0", "0", "0", "0", "0", "0")), []string{"IM0001.dcm", "ImageOrientationPatient", "zero"}, false},
		{"non-unit orientation", edit("anatomy", first, setStrings(tag.ImageOrientationPatient, "2", "0", "0", "0", "2", "0")), []string{"IM0001.dcm", "ImageOrientationPatient", "unit vectors"}, false},
		{"parallel orientation vectors", edit("anatomy", all, setStrings(tag.ImageOrientationPatient, "1", "0", "0", "1", "0", "0")), []string{"IM0016.dcm", "ImageOrientationPatient", "not perpendicular"}, false},
		{"mixed orientations", edit("anatomy", half, setStrings(tag.ImageOrientationPatient, "0", "1", "0", "0", "0", "-1")), []string{"orientation"}, false},
		{"duplicated slice positions", func(t *testing.T, good string) string {
			dir := cloneCase(t, good)
			fs := filesIn(t, dir, "anatomy")
			ds, err := dicom.ParseFile(fs[0], nil, dicom.SkipPixelData())
			if err != nil {
				t.Fatal(err)
			}
			e, err := ds.FindElementByTag(tag.ImagePositionPatient)
			if err != nil {
				t.Fatal(err)
			}
			editDICOM(t, fs[1], setStrings(tag.ImagePositionPatient, e.Value.GetValue().([]string)...))
			return dir
		}, []string{"IM0001.dcm", "IM0002.dcm", "duplicated slice position"}, false},
		{"thermometry without MagneticFieldStrength and EchoTime", edit("sonication-02", all, dropTags(tag.MagneticFieldStrength, tag.EchoTime)), []string{"MagneticFieldStrength", "EchoTime"}, true},
		{"RTSTRUCT without target", edit("structures", all, setStrings(tag.RTROIInterpretedType, "ORGAN")), []string{"target"}, true},
		{"RTSTRUCT in another frame of reference", edit("structures", all, func(ds *dicom.Dataset) {
			setStrings(tag.FrameOfReferenceUID, "2.25.1234")(ds)
			setStrings(tag.ReferencedFrameOfReferenceUID, "2.25.1234")(ds)
		}), []string{"frame of reference", "rtstruct.dcm"}, false},
	}
}

// TestBadInputMessages runs every command on every bad input and checks
// that it ends with exit code 0 or 1 (never a crash or a usage error), that
// no raw error reaches the user and that the messages name the problem.
func TestBadInputMessages(t *testing.T) {
	good := smallCase(t)
	// What analyze must say on standard error besides its figures: an
	// analysis of an incomplete case must not look complete.
	analyzeSays := map[string]string{
		"truncated files":                                        "warning: 7 files of",
		"no PixelSpacing in a thermometry series":                "warning: 88 files of",
		"duplicated slice positions":                             "warning: series #2",
		"RTSTRUCT without target":                                `has no target structure (structures: "Target" (avoid), "Avoid tube" (avoid))`,
		"thermometry without MagneticFieldStrength and EchoTime": "sonication 2 (Thermometry sonication 2): PRF thermometry needs the field strength B0",
		"RTSTRUCT in another frame of reference":                 "warning: frame of reference mismatch",
	}
	for _, bi := range badInputs() {
		t.Run(bi.name, func(t *testing.T) {
			in := bi.make(t, good)
			out := t.TempDir()
			cmds := [][]string{{"inspect", in}, {"analyze", in}}
			if bi.every && !testing.Short() {
				cmds = append(cmds,
					[]string{"report", in, "--json", filepath.Join(out, "m.json")},
					[]string{"deidentify", in, filepath.Join(out, "deid")},
					[]string{"audit", auditInput(in), "-o", filepath.Join(out, "audit")})
			}
			for _, args := range cmds {
				code, stdout, stderr := runCmd(args...)
				msg := stdout + stderr
				t.Logf("%s: exit %d\n%s", args[0], code, lastLines(msg, 12))
				// audit takes an input that is not a folder for a usage
				// error (its documented contract); every other command
				// explains the failure with exit code 1.
				usage := false
				if fi, err := os.Stat(args[1]); args[0] == "audit" && (err != nil || !fi.IsDir()) {
					usage = code == 2
				}
				if code != 0 && code != 1 && !usage {
					t.Errorf("%s: exit %d, want 0 or 1", args[0], code)
				}
				if bad := rawMessage(msg); len(bad) > 0 {
					t.Errorf("%s: raw error text %q in:\n%s", args[0], bad, msg)
				}
				if want := analyzeSays[bi.name]; args[0] == "analyze" && want != "" && !strings.Contains(stderr, want) {
					t.Errorf("analyze: standard error does not say %q:\n%s", want, stderr)
				}
				if args[0] == "inspect" {
					for _, n := range bi.names {
						if !strings.Contains(msg, n) {
							t.Errorf("%s: output does not mention %q:\n%s", args[0], n, msg)
						}
					}
				}
			}
		})
	}
}

func lastLines(s string, n int) string {
	ls := strings.Split(strings.TrimRight(s, "\n"), "\n")
	if len(ls) > n {
		ls = append([]string{"..."}, ls[len(ls)-n:]...)
	}
	return strings.Join(ls, "\n")
}

// auditInput is what a user auditing the case at in passes: the folder of
// cases above a clone (audit takes each subfolder holding DICOM files as a
// case), else in itself.
func auditInput(in string) string {
	if filepath.Base(in) == "case" {
		return filepath.Dir(in)
	}
	return in
}

// crashingDICOM returns a file on which the DICOM library
// (github.com/suyashkumar/dicom v1.1.0) panics: its file meta information
// holds an empty TransferSyntaxUID (0002,0010). See also
// dosemap/dicomio's TestParserPanicIsAFileError.
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
