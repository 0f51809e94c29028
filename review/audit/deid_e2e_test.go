package audit

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/sim"
	"dosecover/review"
)

// TestDeidentifiedAuditLeaksNoIdentity plants an invented identity in a
// simulated case (patient name, the target's ROI name, the series
// descriptions that name the sonications, the case folder's name) and runs
// a de-identified audit with reports: no planted value appears in any file
// the audit writes (records, tables, the report's PDF text) or in its
// summary rows.
func TestDeidentifiedAuditLeaksNoIdentity(t *testing.T) {
	if testing.Short() {
		t.Skip("simulates a session")
	}
	root := t.TempDir()
	dir := filepath.Join(root, "DOEFAM_JANE")
	s := sim.VariedSession(1, 7)
	s.PatientName = "DOEFAM^JANE"
	s.PatientID = "ID-DOEFAM-77"
	if _, err := sim.WriteSession(dir, s); err != nil {
		t.Fatal(err)
	}
	// Same-length replacements keep every element length valid: the
	// target's ROI name and the word the series descriptions start with.
	planted := map[string]string{"Target": "Doefam", "Thermometry": "Jane-Doefam"}
	err := filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		for from, to := range planted {
			b = bytes.ReplaceAll(b, []byte(from), []byte(to))
		}
		return os.WriteFile(p, b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "out")
	cfg := Config{Inputs: []string{dir}, OutDir: out, Workers: 1, Deidentify: true,
		Analyzer: NewAnalyzer(review.DefaultSettings(), ReportArtifacts)}
	sum, err := Run(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	if len(sum.Rows) != 1 || sum.Rows[0].Status != StatusOK {
		t.Fatalf("rows %+v: want the case analysed", sum.Rows)
	}
	leaks := func(where, text string) {
		up := strings.ToUpper(text)
		for _, v := range []string{"DOEFAM", "JANE", "ID-DOEFAM-77"} {
			if strings.Contains(up, v) {
				t.Errorf("%s carries %q", where, v)
			}
		}
	}
	leaks("summary row", sum.Rows[0].Reason+strings.Join(sum.Rows[0].Flags, " ")+sum.Rows[0].Source+sum.Rows[0].Case)
	pdftotext, _ := exec.LookPath("pdftotext")
	err = filepath.WalkDir(out, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		leaks("output path", p)
		switch filepath.Ext(p) {
		case ".json", ".csv", ".txt":
			b, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			leaks(p, string(b))
		case ".pdf":
			if pdftotext == "" {
				if os.Getenv("CI") == "true" {
					t.Error("pdftotext (poppler-utils) is required in CI")
				}
				return nil
			}
			txt, err := exec.Command(pdftotext, p, "-").Output()
			if err != nil {
				t.Errorf("pdftotext %s: %v", p, err)
				return nil
			}
			if !strings.Contains(string(txt), "sonication") {
				t.Errorf("%s: no text read from the report", p)
			}
			leaks(p, string(txt))
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}
