package deid

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/testkit"
)

// FuzzFile: de-identifying any bytes never panics; a refusal is a
// sentence without the Go runtime's text; a copy it writes reads again
// through the guarded parser.
func FuzzFile(f *testing.F) {
	dir := f.TempDir()
	writeMR(f, filepath.Join(dir, "mr.dcm"), []byte{1, 2, 3, 4, 5, 6, 7, 8})
	if data, err := os.ReadFile(filepath.Join(dir, "mr.dcm")); err == nil {
		f.Add(data)
	}
	f.Add(crashingDICOM())
	f.Add(rawFile(explicit, nested(70, true)))
	f.Add(rawFile(explicit, rawEl(0x0010, 0x0010, "PN", []byte("M\xdcLLER^J\xd6RG"))))
	f.Add(rawFile(explicit, rawEl(0x0008, 0x0020, "DA", []byte("1997.04.24"))))
	if py := testkit.FindPydicomTestFiles(); py != "" {
		for _, n := range []string{"MR_small.dcm", "rtstruct.dcm", "nested_priv_SQ.dcm", "MR_small_RLE.dcm"} {
			if data, err := os.ReadFile(filepath.Join(py, n)); err == nil {
				f.Add(data)
			}
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		dir := t.TempDir()
		src, dst := filepath.Join(dir, "in"), filepath.Join(dir, "out")
		if err := os.WriteFile(src, data, 0o644); err != nil {
			t.Fatal(err)
		}
		d, err := New(Options{Salt: "fuzz"})
		if err != nil {
			t.Fatal(err)
		}
		// The copy is written as File writes it, without the atomic
		// rename and its sync (the disk would set the pace).
		var buf bytes.Buffer
		if err := d.copyFile(src, &buf); err != nil {
			msg := err.Error()
			if msg == "" || strings.Contains(msg, "runtime error") || strings.Contains(msg, "goroutine") {
				t.Fatalf("refusal in the runtime's words: %q", msg)
			}
			return
		}
		if err := os.WriteFile(dst, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := dicomio.ParseFile(dst, true); err != nil {
			t.Fatalf("the de-identified copy does not read again: %v", err)
		}
	})
}

// FuzzClean: cleaning identifying values out of kept text never panics,
// keeps the text's length in bytes (valid UTF-8 or not) and leaves no
// identifying value in it, in any ASCII case.
func FuzzClean(f *testing.F) {
	f.Add("M\xdcLLER^J\xd6RG", "thermo m\xdcller \xff j\xd6rg")
	f.Add("TESTPERSON^INVENTED", "Phantom session for testperson")
	f.Add("ßtraße^Ärger", "STRASSE ärger ßtraße")
	f.Fuzz(func(t *testing.T, name, text string) {
		d, err := New(Options{Salt: "fuzz"})
		if err != nil {
			t.Fatal(err)
		}
		d.addToken(name)
		for _, part := range strings.FieldsFunc(name, func(r rune) bool { return r == '^' || r == ' ' }) {
			d.addToken(part)
		}
		out := d.clean(text)
		if len(out) != len(text) {
			t.Fatalf("clean(%q) = %q: length %d, want %d", text, out, len(out), len(text))
		}
		up := asciiUpper(out)
		for tok := range d.tokens {
			if strings.Trim(tok, "X") != "" && strings.Contains(up, tok) {
				t.Fatalf("clean(%q) = %q keeps %q", text, out, tok)
			}
		}
	})
}
