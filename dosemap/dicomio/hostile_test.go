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
	els := []*dicom.Element{
		el(t, tag.ImageType, []string{"ORIGINAL", "PRIMARY", "M", "ND"}),
		el(t, tag.Modality, []string{"MR"}),
		el(t, tag.StudyInstanceUID, []string{"2.25.1000"}),
		el(t, tag.SeriesInstanceUID, []string{"2.25.777"}),
		el(t, tag.SeriesNumber, []string{"77"}),
		el(t, tag.FrameOfReferenceUID, []string{testFoR}),
		el(t, tag.ImagePositionPatient, ds(0, 0, 0)),
		el(t, tag.ImageOrientationPatient, ds(1, 0, 0, 0, 1, 0)),
		el(t, tag.PixelSpacing, ds(1, 1)),
		el(t, tag.SamplesPerPixel, []int{1}),
		el(t, tag.PhotometricInterpretation, []string{"MONOCHROME2"}),
		el(t, tag.NumberOfFrames, []string{strconv.Itoa(frames)}),
		el(t, tag.Rows, []int{rows}),
		el(t, tag.Columns, []int{cols}),
		el(t, tag.BitsAllocated, []int{16}),
		el(t, tag.BitsStored, []int{16}),
		el(t, tag.HighBit, []int{15}),
		el(t, tag.PixelRepresentation, []int{0}),
		pixelElement(t, make([]byte, 2*rows*cols)),
	}
	writeDICOM(t, path, "1.2.840.10008.5.1.4.1.1.4", "2.25.777.1", false, els)
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	w, err := walk(data, nil)
	if err != nil || w.pixelPos == 0 {
		t.Fatalf("no pixel data in the written file: %v", err)
	}
	binary.LittleEndian.PutUint32(data[w.pixelPos-4:], declared)
	// Frame 2 (if any) holds the value 7 in its first pixel, to show
	// which bytes a frame read comes from.
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
	if frames > 2 {
		if _, err := f.WriteAt([]byte{7, 0}, int64(w.pixelPos)+int64(2*rows*cols*2)); err != nil {
			t.Fatal(err)
		}
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
