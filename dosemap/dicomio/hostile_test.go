package dicomio

import (
	"context"
	"encoding/binary"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"syscall"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// writeDeclaredLarge writes a valid MR image file of rows × cols × frames
// 16-bit pixels whose PixelData (7fe0,0010) declares declared bytes, and
// makes the file that long as a sparse file (Truncate): a few kilobytes on
// disk, gigabytes to a reader that reads it whole.
func writeDeclaredLarge(t *testing.T, path string, rows, cols, frames int, declared uint32) {
	t.Helper()
	writeDICOM(t, path, "1.2.840.10008.5.1.4.1.1.4", "2.25.777.1", false, imageElements(t, rows, cols, frames, 1))
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	w, err := walk(data, nil)
	if err != nil || w.pixelPos == 0 {
		t.Fatalf("no pixel data in the written file: %v", err)
	}
	binary.LittleEndian.PutUint32(data[w.pixelPos-4:], declared)
	if err := os.WriteFile(path, data[:w.pixelPos], 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := f.Truncate(int64(w.pixelPos) + int64(declared)); err != nil {
		t.Skipf("cannot make a sparse file here: %v", err)
	}
	// Frame 3 (if any) holds the value 7 in its first pixel, to show
	// which bytes a frame read comes from.
	if frames > 2 {
		if _, err := f.WriteAt([]byte{7, 0}, int64(w.pixelPos)+int64(2*rows*cols*2)); err != nil {
			t.Fatal(err)
		}
	}
}

// imageElements returns the elements of a plain MR image declaring rows ×
// cols × frames 16-bit pixels, with EchoTime 10 ms at 3 T and stored
// frames of zeros.
func imageElements(t *testing.T, rows, cols, frames, stored int) []*dicom.Element {
	return []*dicom.Element{
		el(t, tag.ImageType, []string{"ORIGINAL", "PRIMARY", "M", "ND"}),
		el(t, tag.Modality, []string{"MR"}),
		el(t, tag.StudyInstanceUID, []string{"2.25.1000"}),
		el(t, tag.SeriesInstanceUID, []string{"2.25.777"}),
		el(t, tag.SeriesNumber, []string{"77"}),
		el(t, tag.FrameOfReferenceUID, []string{testFoR}),
		el(t, tag.ImagePositionPatient, ds(0, 0, 0)),
		el(t, tag.ImageOrientationPatient, ds(1, 0, 0, 0, 1, 0)),
		el(t, tag.PixelSpacing, ds(1, 1)),
		el(t, tag.EchoTime, ds(10)),
		el(t, tag.MagneticFieldStrength, ds(3)),
		el(t, tag.SamplesPerPixel, []int{1}),
		el(t, tag.PhotometricInterpretation, []string{"MONOCHROME2"}),
		el(t, tag.NumberOfFrames, []string{strconv.Itoa(frames)}),
		el(t, tag.Rows, []int{rows}),
		el(t, tag.Columns, []int{cols}),
		el(t, tag.BitsAllocated, []int{16}),
		el(t, tag.BitsStored, []int{16}),
		el(t, tag.HighBit, []int{15}),
		el(t, tag.PixelRepresentation, []int{0}),
		pixelElement(t, make([]byte, 2*rows*cols*stored)),
	}
}

// TestImplausibleValuesAreRefused: values outside physical or standard
// ranges refuse the file with a message naming the attribute and the
// value; the file's unchanged form is read.
func TestImplausibleValuesAreRefused(t *testing.T) {
	cases := []struct {
		name string
		tg   tag.Tag
		v    any
		want string // in the reason
	}{
		{"valid", tag.EchoTime, ds(12.8), ""},
		{"TE tiny", tag.EchoTime, []string{"1e-300"}, "implausible EchoTime (0018,0081) 1e-300 ms"},
		{"TE negative", tag.EchoTime, []string{"-5"}, "implausible EchoTime (0018,0081) -5 ms"},
		{"TE NaN", tag.EchoTime, []string{"NaN"}, "implausible EchoTime (0018,0081) NaN ms"},
		{"B0 huge", tag.MagneticFieldStrength, []string{"1000000"}, "implausible MagneticFieldStrength (0018,0087) 1e+06 T"},
		{"B0 Inf", tag.MagneticFieldStrength, []string{"Inf"}, "implausible MagneticFieldStrength (0018,0087) +Inf T"},
		{"bits stored 1", tag.BitsStored, []int{1}, "implausible BitsStored (0028,0101) 1"},
		{"bits stored 17", tag.BitsStored, []int{17}, "implausible BitsStored (0028,0101) 17"},
		{"pixel representation 5", tag.PixelRepresentation, []int{5}, "invalid PixelRepresentation (0028,0103) 5"},
		{"spacing huge", tag.PixelSpacing, []string{"1e308", "1"}, `implausible PixelSpacing (0028,0030) 1e+308\1 mm`},
		{"spacing NaN", tag.PixelSpacing, []string{"NaN", "1"}, "PixelSpacing (0028,0030) is NaN"},
		{"position far", tag.ImagePositionPatient, []string{"0", "1e308", "0"}, "implausible ImagePositionPatient (0020,0032) 0\\1e+308\\0 mm"},
		{"orientation NaN", tag.ImageOrientationPatient, []string{"NaN", "0", "0", "0", "1", "0"}, "implausible ImageOrientationPatient (0020,0037)"},
		{"slope Inf", tag.RescaleSlope, []string{"Inf"}, "implausible rescale: RescaleSlope (0028,1053) +Inf"},
		{"slope 1e300", tag.RescaleSlope, []string{"1e300"}, "implausible rescale: RescaleSlope (0028,1053) 1e+300"},
		{"intercept -1e25", tag.RescaleIntercept, []string{"-1e25"}, "RescaleIntercept (0028,1052) -1e+25"},
	}
	dir := t.TempDir()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			els := imageElements(t, 4, 4, 1, 1)
			replaced := false
			for n, e := range els {
				if e.Tag == c.tg {
					els[n], replaced = el(t, c.tg, c.v), true
				}
			}
			if !replaced {
				els = append(els, el(t, c.tg, c.v))
			}
			p := filepath.Join(dir, strings.ReplaceAll(c.name, " ", "_"))
			writeDICOM(t, p, "1.2.840.10008.5.1.4.1.1.4", "2.25.777.1", false, els)
			fi, err := readFile(p, false)
			if c.want == "" {
				if err != nil {
					t.Fatalf("valid file refused: %v", err)
				}
				return
			}
			if err == nil {
				t.Fatalf("accepted (TE %g s, B0 %g T, frames %+v)", fi.TE, fi.B0, fi.Frames)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("reason %q, want it to contain %q", err, c.want)
			}
		})
	}
}

// TestUnknownVRIsRefused: an element with a VR that PS3.5 6.2 does not
// list is named, with the VR, instead of being read with a guessed length.
func TestUnknownVRIsRefused(t *testing.T) {
	p := filepath.Join(t.TempDir(), "zz.dcm")
	writeDICOM(t, p, "1.2.840.10008.5.1.4.1.1.4", "2.25.777.1", false, imageElements(t, 4, 4, 1, 1))
	data, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	i := strings.Index(string(data), "\x08\x00\x60\x00CS")
	if i < 0 {
		t.Fatal("no Modality element written")
	}
	copy(data[i+4:], "ZZ")
	if err := os.WriteFile(p, data, 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = readFile(p, false)
	if err == nil || !strings.Contains(err.Error(), `Modality (0008,0060)`) || !strings.Contains(err.Error(), `unknown value representation "ZZ"`) {
		t.Errorf("reason %v", err)
	}
}

// allocated returns the bytes fn allocates.
func allocated(fn func()) uint64 {
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	fn()
	runtime.ReadMemStats(&after)
	return after.TotalAlloc - before.TotalAlloc
}

// TestLargeDeclaredPixelDataIsNamedAndSkipped: a file whose valid header
// declares 4 GB of pixel data for one 64×64 frame (a sparse file) is
// skipped with a message naming PixelData and both sizes; only its head
// is read (Rows × Columns × frames × BitsAllocated / 8 = 8192 bytes is what
// a 64×64 16-bit frame takes, PS3.5 8.1.1).
func TestLargeDeclaredPixelDataIsNamedAndSkipped(t *testing.T) {
	dir := t.TempDir()
	writeDeclaredLarge(t, filepath.Join(dir, "big.dcm"), 64, 64, 1, 0xFFFFFFF0)
	var inv *Inventory
	var err error
	grown := allocated(func() { inv, err = Scan(context.Background(), dir, nil) })
	if err != nil {
		t.Fatal(err)
	}
	if len(inv.Skipped) != 1 || inv.Skipped[0].Path != "big.dcm" ||
		!strings.Contains(inv.Skipped[0].Reason, "PixelData (7fe0,0010) declares 4294967280 bytes") ||
		!strings.Contains(inv.Skipped[0].Reason, "need 8192") {
		t.Errorf("skipped %+v", inv.Skipped)
	}
	if grown > 64<<20 {
		t.Errorf("scanning allocated %d MiB for a file whose pixel data are not read", grown>>20)
	}
}

// TestLargeMultiFrameReadsOnlyUsedFrames: a 4 GB multi-frame file whose
// attributes agree with its size (256×256 16-bit pixels × 32767 frames =
// 4 294 836 224 bytes) is listed from its head, and decoding one of its
// frames reads that frame only.
func TestLargeMultiFrameReadsOnlyUsedFrames(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "cine.dcm")
	const rows, cols, frames = 256, 256, 32767
	writeDeclaredLarge(t, p, rows, cols, frames, rows*cols*2*frames)
	var fi *fileInfo
	var err error
	grown := allocated(func() { fi, err = readFile(p, false) })
	if err != nil {
		t.Fatal(err)
	}
	if len(fi.Frames) != frames || fi.Size != int64(fi.PixelPos)+rows*cols*2*frames {
		t.Fatalf("%d frames, size %d", len(fi.Frames), fi.Size)
	}
	if grown > 64<<20 {
		t.Errorf("reading the attributes allocated %d MiB", grown>>20)
	}
	dst := make([]float32, rows*cols)
	grown = allocated(func() { err = decodeFile(fi, []target{{frame: 2, dst: dst, a: 1}}, nil) })
	if err != nil {
		t.Fatal(err)
	}
	if dst[0] != 7 || dst[1] != 0 {
		t.Errorf("frame 3 starts %v %v, want 7 0 (written into the file at that frame)", dst[0], dst[1])
	}
	if grown > 4<<20 {
		t.Errorf("decoding one 128 KiB frame allocated %d MiB", grown>>20)
	}
}

// TestSpecialFilesAreListed: a FIFO with no writer (opening it for reading
// would block), a dangling link and a link loop are listed as skipped
// with their reason, and the scan finishes.
func TestSpecialFilesAreListed(t *testing.T) {
	dir := t.TempDir()
	if err := syscall.Mkfifo(filepath.Join(dir, "pipe"), 0o644); err != nil {
		t.Skipf("cannot make a FIFO here: %v", err)
	}
	if err := os.Symlink(filepath.Join(dir, "gone"), filepath.Join(dir, "dangling")); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(filepath.Join(dir, "loop"), filepath.Join(dir, "loop")); err != nil {
		t.Fatal(err)
	}
	inv, err := Scan(context.Background(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]string{}
	for _, s := range inv.Skipped {
		got[s.Path] = s.Reason
	}
	want := map[string]string{
		"pipe":     "named pipe (FIFO)",
		"dangling": "dangling symbolic link",
		"loop":     "symbolic link loop",
	}
	for name, sub := range want {
		if !strings.Contains(got[name], sub) {
			t.Errorf("%s: reason %q, want it to say %q", name, got[name], sub)
		}
	}
	// The FIFO given to the reader directly (as if it appeared after the
	// folder was listed) is refused without blocking.
	if _, err := readFile(filepath.Join(dir, "pipe"), false); err == nil || !strings.Contains(err.Error(), "FIFO") {
		t.Errorf("reading the FIFO: %v", err)
	}
	if ok, err := SniffFile(filepath.Join(dir, "pipe")); ok || err == nil {
		t.Errorf("SniffFile on a FIFO: %v, %v", ok, err)
	}
}

// TestScanUnderAddressSpaceLimit runs a scan and a load of a case holding
// a 4 GB declared file in a child process limited to 2 GB of address space
// (ulimit -v): it must finish, name the file and load the good series.
func TestScanUnderAddressSpaceLimit(t *testing.T) {
	if dir := os.Getenv("DOSECOVER_LIMITED_SCAN"); dir != "" {
		_, inv, err := Load(context.Background(), dir, LoadOptions{}, nil)
		if err != nil {
			fmt.Println("load failed:", err)
			os.Exit(3)
		}
		for _, s := range inv.Skipped {
			fmt.Printf("skipped %s: %s\n", s.Path, s.Reason)
		}
		fmt.Printf("series %d\n", len(inv.Series))
		os.Exit(0)
	}
	if _, err := exec.LookPath("bash"); err != nil {
		t.Skip("bash not found")
	}
	dir := writeTestCase(t)
	plain, err := Scan(context.Background(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	writeDeclaredLarge(t, filepath.Join(dir, "huge.dcm"), 64, 64, 1, 0xFFFFFFF0)
	writeDeclaredLarge(t, filepath.Join(dir, "cine.dcm"), 256, 256, 32767, 256*256*2*32767)
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command("bash", "-c", `ulimit -v 2097152 && exec "$0" -test.run '^TestScanUnderAddressSpaceLimit$'`, exe)
	cmd.Env = append(os.Environ(), "DOSECOVER_LIMITED_SCAN="+dir)
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("limited scan: %v\n%s", err, out)
	}
	if testing.Verbose() {
		t.Logf("%s", out)
	}
	if !strings.Contains(string(out), "skipped huge.dcm: implausible pixel data") {
		t.Errorf("the 4 GB file is not named:\n%s", out)
	}
	// Every series of the case, plus the 4 GB multi-frame one.
	if want := fmt.Sprintf("series %d\n", len(plain.Series)+1); !strings.Contains(string(out), want) {
		t.Errorf("want %q:\n%s", want, out)
	}
}

// TestContourFarAwayAndDuplicatedROI: a contour point at 1e308 mm is named
// as a problem of its contour (which is ignored, so no grid is sized from
// it), and two ROIs with one name are named as a duplicated ROI.
func TestContourFarAwayAndDuplicatedROI(t *testing.T) {
	dir := t.TempDir()
	sq := func(z float64) [][3]float64 { return [][3]float64{{-3, -3, z}, {3, -3, z}, {3, 3, z}, {-3, 3, z}} }
	far := sq(0)
	far[2] = [3]float64{1e308, 3, 0}
	writeStructureSet(t, filepath.Join(dir, "rs"), testFoR, []roiSpec{
		{Number: 1, Name: "target", Type: "PTV", Contours: [][][3]float64{sq(-3), far, sq(3)}},
		{Number: 2, Name: "Target", Type: "PTV", Contours: [][][3]float64{sq(0)}},
	})
	inv, err := Scan(context.Background(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	all := strings.Join(inv.Problems, "\n")
	for _, want := range []string{
		"ContourData (3006,0050) point 3 is (1e+308, 3, 0) mm, more than 10000 mm from the origin: contour ignored",
		`ROI 1 and ROI 2 have the same name "Target": duplicated ROI`,
	} {
		if !strings.Contains(all, want) {
			t.Errorf("problems\n%s\nwant %q", all, want)
		}
	}
	if len(inv.Structures) != 2 || inv.Structures[0].Contours != 2 {
		t.Errorf("structures %+v: want 2, the first with its 2 sound contours", inv.Structures)
	}
}
