package report

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"image"
	"image/png"
	"io"
	"path/filepath"
	"strings"
	"time"

	"gonum.org/v1/plot/vg/vgimg"
)

// DefaultDPI is the resolution of the PNG report unless asked otherwise:
// 150 dpi prints legibly on A4 (1240 × 1754 pixels).
const DefaultDPI = 150

// RenderImage draws the first report page at dpi (at least 72) and
// returns it.
func RenderImage(in *Input, dpi int) (image.Image, error) {
	return RenderPageImage(in, 1, dpi)
}

// RenderPageImage draws page n (see Pages) of the report at dpi (at least
// 72) and returns it.
func RenderPageImage(in *Input, n, dpi int) (image.Image, error) {
	if dpi < 72 {
		return nil, fmt.Errorf("report: resolution %d dpi is below 72", dpi)
	}
	c := vgimg.NewWith(vgimg.UseWH(PageWidth, PageHeight), vgimg.UseDPI(dpi))
	if err := RenderPage(c, in, n); err != nil {
		return nil, err
	}
	return c.Image(), nil
}

// PagePNG returns the path of the PNG of page n of a report whose first
// page is written to first: first itself for page 1, else first with
// "-page2" (and so on) before its extension.
func PagePNG(first string, n int) string {
	if n <= 1 {
		return first
	}
	ext := filepath.Ext(first)
	return fmt.Sprintf("%s-page%d%s", strings.TrimSuffix(first, ext), n, ext)
}

// RenderPNG writes the report page as a PNG at dpi. The PNG carries the
// title, the case label and the software as tEXt chunks (PNG 1.2, section
// 4.2.3.1) and its resolution as a pHYs chunk (section 4.2.4.4).
func RenderPNG(w io.Writer, in *Input, dpi int) error {
	return renderPNGPage(w, in, 1, dpi)
}

// renderPNGPage writes page n of the report as a PNG (see RenderPNG).
func renderPNGPage(w io.Writer, in *Input, n, dpi int) error {
	img, err := RenderPageImage(in, n, dpi)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	enc := png.Encoder{CompressionLevel: png.DefaultCompression}
	if err := enc.Encode(&buf, img); err != nil {
		return fmt.Errorf("report: encoding PNG: %w", err)
	}
	title := in.Title
	if title == "" {
		title = "Thermal dose coverage review"
	}
	created := ""
	if !in.ReviewDate.IsZero() {
		created = in.ReviewDate.UTC().Format(time.RFC1123) // PNG 1.2, 11.3.4.2: RFC 1123 form
	}
	out, err := addPNGChunks(buf.Bytes(), dpi, [][2]string{
		{"Title", title + " - " + in.CaseLabel + pageNote(in, n)},
		{"Software", in.Software},
		{"Creation Time", created},
		{"Disclaimer", "For retrospective review, QA and teaching; not a planning or treatment system."},
	})
	if err != nil {
		return err
	}
	_, err = w.Write(out)
	return err
}

// pageNote returns ", page n of N" for a report of several pages.
func pageNote(in *Input, n int) string {
	if p := Pages(in); p > 1 {
		return fmt.Sprintf(", page %d of %d", n, p)
	}
	return ""
}

// addPNGChunks inserts pHYs and tEXt chunks after the IHDR chunk of an
// encoded PNG. tEXt holds Latin-1; other runes are replaced by '?'.
func addPNGChunks(data []byte, dpi int, texts [][2]string) ([]byte, error) {
	const sigLen = 8
	if len(data) < sigLen+25 || string(data[12:16]) != "IHDR" {
		return nil, fmt.Errorf("report: encoded PNG has no IHDR chunk")
	}
	ihdrEnd := sigLen + 8 + int(binary.BigEndian.Uint32(data[8:12])) + 4
	var out bytes.Buffer
	out.Write(data[:ihdrEnd])
	chunk := func(typ string, body []byte) {
		var hdr [8]byte
		binary.BigEndian.PutUint32(hdr[:4], uint32(len(body)))
		copy(hdr[4:], typ)
		out.Write(hdr[:])
		out.Write(body)
		crc := crc32.NewIEEE()
		crc.Write([]byte(typ))
		crc.Write(body)
		var c [4]byte
		binary.BigEndian.PutUint32(c[:], crc.Sum32())
		out.Write(c[:])
	}
	ppm := uint32(float64(dpi)/0.0254 + 0.5) // pixels per metre
	phys := make([]byte, 9)
	binary.BigEndian.PutUint32(phys[0:4], ppm)
	binary.BigEndian.PutUint32(phys[4:8], ppm)
	phys[8] = 1 // unit: metre
	chunk("pHYs", phys)
	for _, t := range texts {
		if t[1] == "" {
			continue
		}
		body := append([]byte(t[0]), 0)
		for _, r := range t[1] {
			if r > 0xFF || r == 0 {
				r = '?'
			}
			body = append(body, byte(r))
		}
		chunk("tEXt", body)
	}
	out.Write(data[ihdrEnd:])
	return out.Bytes(), nil
}

// RenderPDF writes the report as a one-page PDF with the same layout as the
// PNG; text stays text (fonts embedded as UTF-8 subsets), images are
// embedded as PNG. The document's creation date is the review date.
func RenderPDF(w io.Writer, in *Input) error {
	c := newPDFCanvas(PageWidth, PageHeight)
	for n := 1; n <= Pages(in); n++ {
		if n > 1 {
			c.newPage()
		}
		if err := RenderPage(c, in, n); err != nil {
			return err
		}
	}
	title := in.Title
	if title == "" {
		title = "Thermal dose coverage review"
	}
	if err := c.writeTo(w, title+" - "+in.CaseLabel, in.ReviewDate); err != nil {
		return fmt.Errorf("report: writing PDF: %w", err)
	}
	return nil
}
