package report

import (
	"os"
	"testing"
)

func TestRenderSample(t *testing.T) {
	f, _ := os.Create("/tmp/rep.png")
	if err := RenderPNG(f, sampleInput(), 150); err != nil {
		t.Fatal(err)
	}
	f.Close()
	g, _ := os.Create("/tmp/rep.pdf")
	if err := RenderPDF(g, sampleInput()); err != nil {
		t.Fatal(err)
	}
	g.Close()
}
