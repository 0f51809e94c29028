package report

import (
	"strings"
	"testing"

	"dosecover/dosemap"
)

// TestHideLatin1AndMaskNames: identity in structure names and warnings is
// blanked byte for byte, also for a Latin-1 name (not valid UTF-8) and a
// placeholder name made of X alone, without a crash or an endless loop.
func TestHideLatin1AndMaskNames(t *testing.T) {
	cases := []struct {
		patient dosemap.Patient
		in      string
		gone    []string
	}{
		{dosemap.Patient{Name: "M\xdcLLER^J\xd6RG", ID: "\xc9-77"}, "m\xdcller tumour (J\xd6RG)", []string{"M\xdcLLER", "J\xd6RG", "m\xdcller"}},
		{dosemap.Patient{Name: "XXX^XXXX", ID: "XXXXXX"}, "target XXXX", nil},
		{dosemap.Patient{Name: "Doe^Jane", ID: "INV-0042", Institution: "Nowhere Clinic"}, "doe tumour, seen at NOWHERE clinic, id inv-0042", []string{"doe", "NOWHERE", "inv-0042", "clinic"}},
	}
	for _, c := range cases {
		got := hide(c.in, &dosemap.Case{Patient: c.patient}, true)
		if len(got) != len(c.in) {
			t.Errorf("hide(%q) = %q: length changed", c.in, got)
		}
		for _, g := range c.gone {
			if strings.Contains(got, g) {
				t.Errorf("hide(%q) = %q keeps %q", c.in, got, g)
			}
		}
	}
}
