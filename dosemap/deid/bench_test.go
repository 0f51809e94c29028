package deid

import (
	"fmt"
	"os"
	"path/filepath"
	"testing"
)

// BenchmarkFile de-identifies one MR file with pixel data of several
// sizes. Pixels are copied as raw bytes, so the time should grow with the
// file size no faster than reading and writing it; compare with
// BenchmarkCopy at the same size.
func BenchmarkFile(b *testing.B) {
	for _, n := range []int{64, 256, 512} {
		dir := b.TempDir()
		src := filepath.Join(dir, "src.dcm")
		writeMR(b, src, make([]byte, 2*n*n))
		d, err := New(Options{Salt: "bench"})
		if err != nil {
			b.Fatal(err)
		}
		b.Run(fmt.Sprintf("%dx%d", n, n), func(b *testing.B) {
			for b.Loop() {
				if err := d.File(src, filepath.Join(dir, "dst.dcm")); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("copy-%dx%d", n, n), func(b *testing.B) {
			for b.Loop() {
				data, err := os.ReadFile(src)
				if err != nil {
					b.Fatal(err)
				}
				if err := os.WriteFile(filepath.Join(dir, "copy.dcm"), data, 0o644); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
