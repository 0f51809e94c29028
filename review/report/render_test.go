package report

import (
	"bytes"
	"flag"
	"fmt"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg/recorder"
)

var update = flag.Bool("update", false, "rewrite the golden images in testdata/")

// goldenDPI keeps the golden image small; the layout is resolution
// independent.
const goldenDPI = 100

// comparePixels compares got with the golden PNG at path: a pixel differs
// when any channel differs by more than tol (out of 255); at most maxFrac
// of the pixels may differ (font rasterisation may move edge pixels).
func comparePixels(t *testing.T, got image.Image, path string, tol int, maxFrac float64) {
	t.Helper()
	if *update {
		var buf bytes.Buffer
		if err := png.Encode(&buf, got); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("wrote %s", path)
		return
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("golden image: %v (run go test -update to create it)", err)
	}
	defer f.Close()
	want, err := png.Decode(f)
	if err != nil {
		t.Fatalf("decoding %s: %v", path, err)
	}
	if got.Bounds() != want.Bounds() {
		t.Fatalf("size %v, golden %v", got.Bounds(), want.Bounds())
	}
	b := got.Bounds()
	bad := 0
	diff := image.NewRGBA(b)
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r0, g0, b0, _ := got.At(x, y).RGBA()
			r1, g1, b1, _ := want.At(x, y).RGBA()
			d := max(absDiff(r0, r1), absDiff(g0, g1), absDiff(b0, b1)) >> 8
			if int(d) > tol {
				bad++
				diff.Set(x, y, image.White)
			}
		}
	}
	frac := float64(bad) / float64(b.Dx()*b.Dy())
	if frac > maxFrac {
		// Kept after the test (outside its temporary folder) for inspection.
		out := filepath.Join(os.TempDir(), "dosecover-"+strings.TrimSuffix(filepath.Base(path), ".png")+"-diff.png")
		var buf bytes.Buffer
		png.Encode(&buf, diff)
		os.WriteFile(out, buf.Bytes(), 0o644)
		t.Errorf("%d pixels (%.3f %%) differ from %s by more than %d; limit %.3f %%; differences in %s",
			bad, 100*frac, path, tol, 100*maxFrac, out)
	}
}

func absDiff(a, b uint32) uint32 {
	if a > b {
		return a - b
	}
	return b - a
}

func TestGoldenSample(t *testing.T) {
	img, err := RenderImage(sampleInput(), goldenDPI)
	if err != nil {
		t.Fatal(err)
	}
	// A4 at 100 dpi: 210 mm and 297 mm at 25.4 mm per inch (ISO 216).
	if b := img.Bounds(); b.Dx() != 827 || b.Dy() != 1169 {
		t.Errorf("page %v pixels, want 827x1169", b.Size())
	}
	comparePixels(t, img, filepath.Join("testdata", "sample.png"), 16, 0.001)
}

func TestPNGResolutionAndText(t *testing.T) {
	var buf bytes.Buffer
	in := sampleInput()
	if err := RenderPNG(&buf, in, DefaultDPI); err != nil {
		t.Fatal(err)
	}
	cfg, err := png.DecodeConfig(bytes.NewReader(buf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	// 150 dpi A4: round(210/25.4*150) = 1240, round(297/25.4*150) = 1754.
	if cfg.Width != 1240 || cfg.Height != 1754 {
		t.Errorf("PNG %dx%d, want 1240x1754", cfg.Width, cfg.Height)
	}
	if !bytes.Contains(buf.Bytes(), []byte("tEXtTitle\x00Thermal dose coverage review - "+in.CaseLabel)) {
		t.Error("PNG lacks the Title text chunk")
	}
	if !bytes.Contains(buf.Bytes(), []byte("pHYs")) {
		t.Error("PNG lacks the pHYs chunk")
	}
	if _, err := RenderImage(in, 50); err == nil {
		t.Error("50 dpi accepted")
	}
}

// pdfTool returns the path of a poppler tool; skips when missing unless
// CI=true.
func pdfTool(t *testing.T, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("%s (poppler-utils) is required in CI", name)
		}
		t.Skipf("%s not found (install poppler-utils)", name)
	}
	return p
}

func TestPDFOnePageWithText(t *testing.T) {
	in := sampleInput()
	var buf bytes.Buffer
	if err := RenderPDF(&buf, in); err != nil {
		t.Fatal(err)
	}
	// One page object: count "/Type /Page" not followed by "s" (PDF 1.7,
	// ISO 32000-1 7.7.3.3: a page object has /Type /Page, the tree /Pages).
	pages := regexp.MustCompile(`/Type\s*/Page[^s]`).FindAll(buf.Bytes(), -1)
	if len(pages) != 1 {
		t.Errorf("PDF has %d page objects, want 1", len(pages))
	}
	path := filepath.Join(t.TempDir(), "r.pdf")
	os.WriteFile(path, buf.Bytes(), 0o644)
	info, err := exec.Command(pdfTool(t, "pdfinfo"), path).CombinedOutput()
	if err != nil {
		t.Fatalf("pdfinfo: %v\n%s", err, info)
	}
	if !regexp.MustCompile(`(?m)^Pages:\s+1$`).Match(info) || !strings.Contains(string(info), "A4") {
		t.Errorf("pdfinfo:\n%s\nwant one A4 page", info)
	}
	txt, err := exec.Command(pdfTool(t, "pdftotext"), "-layout", path, "-").CombinedOutput()
	if err != nil {
		t.Fatalf("pdftotext: %v\n%s", err, txt)
	}
	text := string(txt)
	for _, want := range []string{
		in.CaseLabel, "93.4 %", "91.1 % to 95.2 %", "1.2 %", "240 CEM43 min", "3.0 mm",
		"0.094 mL", "0.031 mL", "Lethal in Nerve", in.InputsSHA256, "dosecover 0.1.0",
		"Not a treatment planning", "vary by tissue", "Defer to local protocols",
		"-0.0100 ppm/°C", "3.00 T / 12.8 ms",
	} {
		if !strings.Contains(text, want) {
			t.Errorf("PDF text lacks %q", want)
		}
	}
	if t.Failed() {
		t.Logf("PDF text:\n%s", text)
	}
}

// TestPDFMatchesPNGLayout renders the PDF with pdftoppm and compares it to
// the PNG of the same input: one layout code path, so they agree except
// for font rasterisation.
func TestPDFMatchesPNGLayout(t *testing.T) {
	ppm := pdfTool(t, "pdftoppm")
	_, _, phantom := phantomInput(t, false)
	for name, in := range map[string]*Input{"sample": sampleInput(), "phantom": phantom} {
		t.Run(name, func(t *testing.T) { comparePDFAndPNG(t, ppm, in) })
	}
}

func comparePDFAndPNG(t *testing.T, ppm string, in *Input) {
	dir := t.TempDir()
	var buf bytes.Buffer
	if err := RenderPDF(&buf, in); err != nil {
		t.Fatal(err)
	}
	pdf := filepath.Join(dir, "r.pdf")
	os.WriteFile(pdf, buf.Bytes(), 0o644)
	if out, err := exec.Command(ppm, "-png", "-r", fmt.Sprint(goldenDPI), "-singlefile", pdf, filepath.Join(dir, "p")).CombinedOutput(); err != nil {
		t.Fatalf("pdftoppm: %v\n%s", err, out)
	}
	f, err := os.Open(filepath.Join(dir, "p.png"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	fromPDF, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	direct, err := RenderImage(in, goldenDPI)
	if err != nil {
		t.Fatal(err)
	}
	// pdftoppm rounds the page size up (841.89 pt at 100 dpi = 1169.3 px).
	if d := fromPDF.Bounds().Size().Sub(direct.Bounds().Size()); d.X < 0 || d.X > 1 || d.Y < 0 || d.Y > 1 {
		t.Fatalf("PDF page %v pixels, PNG %v", fromPDF.Bounds().Size(), direct.Bounds().Size())
	}
	// Compare 8x8 block means: equal layout gives close means even where
	// two rasterisers antialias differently.
	const blk = 8
	b := direct.Bounds()
	bad, n := 0, 0
	for y := 0; y+blk <= b.Dy(); y += blk {
		for x := 0; x+blk <= b.Dx(); x += blk {
			if d := blockMean(direct, x, y, blk) - blockMean(fromPDF, x, y, blk); d > 40 || d < -40 {
				bad++
			}
			n++
		}
	}
	if frac := float64(bad) / float64(n); frac > 0.01 {
		t.Errorf("%.2f %% of 8x8 blocks differ by more than 40 grey levels between PDF and PNG", 100*frac)
	}
}

func blockMean(img image.Image, x0, y0, n int) float64 {
	var s float64
	for y := y0; y < y0+n; y++ {
		for x := x0; x < x0+n; x++ {
			r, g, b, _ := img.At(x, y).RGBA()
			s += float64(r+g+b) / 3 / 257
		}
	}
	return s / float64(n*n)
}

// TestLayoutFitsLongCase renders a case with far more sonications and
// quality notes than one page holds: every text stays inside the page
// margins, the cautions are drawn once per page, the table continues on
// page 2 of 2 (saying so on page 1) with every sonication listed once, and
// the notes left out are counted.
func TestLayoutFitsLongCase(t *testing.T) {
	in := sampleInput()
	for n := len(in.Sonications) + 1; n <= 40; n++ {
		in.Sonications = append(in.Sonications, SonicationRow{Number: n, Label: fmt.Sprintf("sonication %d", n), PeakC: 55, PeakDose: 500})
	}
	for n := 0; n < 25; n++ {
		in.Quality.Notes = append(in.Quality.Notes, fmt.Sprintf("sonication %d frame 4: motion: magnitude correlation with baseline 0.80 below 0.90, frame left out of the dose", n+1))
	}
	if Pages(in) != 2 {
		t.Fatalf("%d pages, want 2", Pages(in))
	}
	labels := map[string]int{}
	for page := 1; page <= 2; page++ {
		rec := &recorder.Canvas{}
		if err := RenderPage(rec, in, page); err != nil {
			t.Fatal(err)
		}
		var cautions, continued, pageMark, moreNotes int
		// Text drawn in a transformed frame (the plots' rotated axis labels)
		// has frame coordinates: follow transforms through Push and Pop.
		transformed := []bool{false}
		for _, a := range rec.Actions {
			top := len(transformed) - 1
			switch a.(type) {
			case *recorder.Push:
				transformed = append(transformed, transformed[top])
				continue
			case *recorder.Pop:
				transformed = transformed[:top]
				continue
			case *recorder.Rotate, *recorder.Translate, *recorder.Scale:
				transformed[top] = true
				continue
			}
			fs, ok := a.(*recorder.FillString)
			if !ok || transformed[top] {
				continue
			}
			// Baselines between the bottom margin and the top margin (A4, 12 mm).
			if fs.Point.Y < margin || fs.Point.Y > PageHeight-margin || fs.Point.X < margin-1 || fs.Point.X > PageWidth-margin {
				t.Errorf("page %d: text %q at %v lies outside the page margins", page, fs.String, fs.Point)
			}
			switch {
			case fs.String == "Cautions":
				cautions++
			case strings.HasPrefix(fs.String, "Continued on page 2 of 2:"):
				continued++
			case fs.String == fmt.Sprintf("page %d of 2", page):
				pageMark++
			case strings.HasPrefix(fs.String, "... ") && strings.Contains(fs.String, "more notes"):
				moreNotes++
			case strings.HasPrefix(strings.TrimPrefix(fs.String, "(left out) "), "sonication "):
				labels[strings.TrimPrefix(fs.String, "(left out) ")]++
			}
		}
		wantCont, wantNotes := 1, 1
		if page == 2 {
			wantCont, wantNotes = 0, 0
		}
		if cautions != 1 || continued != wantCont || pageMark != 1 || moreNotes != wantNotes {
			t.Errorf("page %d: cautions drawn %d times, continuation line %d, page mark %d, note count line %d; want 1, %d, 1, %d",
				page, cautions, continued, pageMark, moreNotes, wantCont, wantNotes)
		}
	}
	for _, s := range in.Sonications {
		if labels[s.Label] != 1 {
			t.Errorf("%q listed %d times over the two pages, want once", s.Label, labels[s.Label])
		}
	}
}
