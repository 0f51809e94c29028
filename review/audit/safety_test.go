//go:build unix

package audit

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"syscall"
	"testing"

	"dosecover/dosemap/testkit"
	"dosecover/review"
)

// TestOutputFolderHoldingInputIsRefused: with the output folder set to the
// folder that holds the case, the run is refused before anything is
// written or removed; a file inside the case whose name looks like one of
// dosecover's temporary files survives.
func TestOutputFolderHoldingInputIsRefused(t *testing.T) {
	root := makeCases(t, t.TempDir(), 2)
	planted := filepath.Join(root, "case-000", tempPrefix+"img.dcm.123.tmp")
	writeFiles(t, root, map[string][]byte{"case-000/" + tempPrefix + "img.dcm.123.tmp": fakeDICOM("belongs to the case")})
	for _, out := range []string{root, filepath.Dir(root)} {
		cfg := Config{Inputs: []string{filepath.Join(root, "case-000")}, OutDir: out, Workers: 1, Analyzer: newFileCounter().analyze}
		sum, err := Run(context.Background(), cfg)
		var ue *UsageError
		if !errors.As(err, &ue) || !strings.Contains(err.Error(), "contains the input folder") {
			t.Errorf("output %s over the input: err %v, want a usage error saying it contains the input", out, err)
		}
		if sum != nil {
			t.Errorf("output %s: a summary was returned for a refused run", out)
		}
	}
	if _, err := os.Stat(planted); err != nil {
		t.Errorf("a file of the case was removed: %v", err)
	}
	if _, err := os.Stat(filepath.Join(root, "cases")); !os.IsNotExist(err) {
		t.Errorf("the refused run wrote into the folder holding the case: %v", err)
	}
}

// TestCleanupOnlyTouchesItsOwnNames: the clean-up of leftovers removes
// only names writeTemp makes, in the folders an audit writes (the output
// folder and each cases/<case> folder), and nothing below them.
func TestCleanupOnlyTouchesItsOwnNames(t *testing.T) {
	out := t.TempDir()
	files := map[string]bool{ // name -> removed
		tempPrefix + "summary.csv.4711.tmp":                true,
		"cases/a/" + tempPrefix + "case.json.99.tmp":       true,
		"cases/a/deeper/" + tempPrefix + "case.json.9.tmp": false, // not a folder the audit writes
		"cases/a/" + tempPrefix + "notes.tmp":              false, // no random part
		"cases/a/" + tempPrefix + "case.json.12x.tmp":      false,
		"other/" + tempPrefix + "x.1.tmp":                  false,
		"cases/a/report.png":                               false,
	}
	for name := range files {
		writeFiles(t, out, map[string][]byte{name: []byte("x")})
	}
	if err := removeTemps(out, 0); err != nil {
		t.Fatal(err)
	}
	for name, removed := range files {
		_, err := os.Stat(filepath.Join(out, filepath.FromSlash(name)))
		if removed != os.IsNotExist(err) {
			t.Errorf("%s: removed %v, want %v", name, os.IsNotExist(err), removed)
		}
	}
}

// TestRunsShareAFolderOnlyAsShards: while a shard holds the output folder,
// a whole run into it is refused and the shard's live temporary file
// stays; another shard may run, but removes no temporary file; once the
// shard has finished, a whole run cleans the leftovers.
func TestRunsShareAFolderOnlyAsShards(t *testing.T) {
	root := makeCases(t, t.TempDir(), 4)
	out := filepath.Join(t.TempDir(), "out")
	if err := os.MkdirAll(filepath.Join(out, "cases", "x"), 0o755); err != nil {
		t.Fatal(err)
	}
	live := filepath.Join(out, "cases", "x", tempPrefix+"case.json.77.tmp")
	writeFiles(t, out, map[string][]byte{"cases/x/" + tempPrefix + "case.json.77.tmp": []byte("being written")})

	release, alone, err := lockOutDir(out, out, true, nil) // a shard in progress
	if err != nil || !alone {
		t.Fatalf("first shard: alone %v, %v", alone, err)
	}
	whole := Config{Inputs: []string{root}, OutDir: out, Workers: 1, Analyzer: newFileCounter().analyze}
	_, err = Run(context.Background(), whole)
	var ue *UsageError
	if !errors.As(err, &ue) || !strings.Contains(err.Error(), "in use by another audit run") {
		t.Errorf("whole run beside a shard: %v, want it refused", err)
	}
	shard := whole
	shard.Shard = Shard{Index: 2, Count: 2}
	if _, err := Run(context.Background(), shard); err != nil {
		t.Errorf("second shard: %v", err)
	}
	if _, err := os.Stat(live); err != nil {
		t.Errorf("the live temporary file of the running shard was removed: %v", err)
	}
	release()
	if _, err := Run(context.Background(), whole); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(live); !os.IsNotExist(err) {
		t.Errorf("a leftover of a finished run was kept by a run alone in the folder: %v", err)
	}
	// And the other way round: a shard is refused while a whole run holds
	// the folder.
	release, _, err = lockOutDir(out, out, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer release()
	if _, err := Run(context.Background(), shard); err == nil || !strings.Contains(err.Error(), "in use by a whole audit run") {
		t.Errorf("shard beside a whole run: %v, want it refused", err)
	}
}

// TestDiscoveryListsSpecialFiles: a FIFO (no writer) and a dangling link
// in a case are listed as skipped with their reason, and discovery does
// not block on the FIFO.
func TestDiscoveryListsSpecialFiles(t *testing.T) {
	root := makeCases(t, t.TempDir(), 1)
	c := filepath.Join(root, "case-000")
	if err := syscall.Mkfifo(filepath.Join(c, "pipe"), 0o644); err != nil {
		t.Skipf("cannot make a FIFO here: %v", err)
	}
	if err := os.Symlink(filepath.Join(c, "gone"), filepath.Join(c, "link")); err != nil {
		t.Fatal(err)
	}
	cases, problems, err := Discover([]string{c})
	if err != nil {
		t.Fatal(err)
	}
	if len(cases) != 1 {
		t.Fatalf("%d cases", len(cases))
	}
	got := strings.Join(problems, "\n")
	for _, want := range []string{filepath.Join(c, "pipe") + ": a named pipe (FIFO)", filepath.Join(c, "link") + ": dangling symbolic link"} {
		if !strings.Contains(got, want) {
			t.Errorf("skipped %q, want %q", got, want)
		}
	}
	if ok, err := IsDICOMFile(filepath.Join(c, "pipe")); ok || err == nil {
		t.Errorf("IsDICOMFile on a FIFO: %v, %v", ok, err)
	}
}

// TestDeidentifiedFailureHidesPaths: in a de-identified audit, a case whose
// folder and file names carry the patient's name fails; its reason in
// case.json, summary.csv and errors.csv names the file by its number, not
// by its path.
func TestDeidentifiedFailureHidesPaths(t *testing.T) {
	root := t.TempDir()
	writeFiles(t, root, map[string][]byte{
		"Doe_Jane/series_DOE/IM_DOE_JANE_001.dcm": fakeDICOM("image"),
		"Doe_Jane/series_DOE/FAIL":                fakeDICOM("marker"),
	})
	out := filepath.Join(t.TempDir(), "out")
	cfg := Config{Inputs: []string{filepath.Join(root, "Doe_Jane")}, OutDir: out, Workers: 1, Deidentify: true, Analyzer: newFileCounter().analyze}
	sum, err := Run(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	if len(sum.Rows) != 1 || sum.Rows[0].Status != StatusFailed {
		t.Fatalf("rows %+v: want one failed case", sum.Rows)
	}
	if !strings.Contains(sum.Rows[0].Reason, "reading case-") || !strings.Contains(sum.Rows[0].Reason, "file 1") {
		t.Errorf("reason %q: want the case ID and the file's number", sum.Rows[0].Reason)
	}
	err = filepath.WalkDir(out, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		if strings.Contains(strings.ToUpper(p), "DOE") {
			t.Errorf("output path %s carries the name", p)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		if strings.Contains(strings.ToUpper(string(b)), "DOE") || strings.Contains(strings.ToUpper(string(b)), "JANE") {
			t.Errorf("%s carries the name:\n%s", p, b)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

// TestAuditWithLargeDeclaredFile: a case holding a file whose valid header
// declares 1 GiB of pixel data (a sparse file; the input hash reads it
// all, so the test keeps it at 1 GiB; dicomio's tests take 4 GB under an
// address-space limit) does not stop the audit or exhaust memory: the file
// is skipped by the reader and named, every case gets its row, and the
// run allocates less than half the declared size.
func TestAuditWithLargeDeclaredFile(t *testing.T) {
	src := testkit.PydicomTestFiles(t)
	mr, err := os.ReadFile(filepath.Join(src, "MR_small.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	root := t.TempDir()
	writeFiles(t, root, map[string][]byte{"plain/MR_small.dcm": mr, "big/MR_small.dcm": mr})
	i := bytes.LastIndex(mr, []byte{0xE0, 0x7F, 0x10, 0x00, 'O', 'W'})
	if i < 0 {
		t.Fatal("MR_small.dcm: no explicit VR PixelData element")
	}
	big := append([]byte(nil), mr[:i+12]...)
	const declared = 1 << 30
	binary.LittleEndian.PutUint32(big[i+8:], declared)
	p := filepath.Join(root, "big", "huge.dcm")
	if err := os.WriteFile(p, big, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Truncate(p, int64(len(big))+declared); err != nil {
		t.Skipf("cannot make a sparse file here: %v", err)
	}
	cfg := Config{Inputs: []string{filepath.Join(root, "plain"), filepath.Join(root, "big")}, OutDir: filepath.Join(t.TempDir(), "out"), Workers: 2,
		Analyzer: NewAnalyzer(review.DefaultSettings(), nil)}
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	sum, err := Run(context.Background(), cfg)
	runtime.ReadMemStats(&after)
	if err != nil {
		t.Fatal(err)
	}
	if len(sum.Rows) != 2 {
		t.Fatalf("rows %+v: want both cases", sum.Rows)
	}
	for _, r := range sum.Rows {
		// Anatomy only (MR_small is one MR image): incomplete, never
		// failed for the large file.
		if r.Status != StatusIncomplete || !strings.Contains(r.Reason, "thermometry") {
			t.Errorf("%s: %s %q, want incomplete for lack of thermometry", r.Case, r.Status, r.Reason)
		}
	}
	if r := sum.Rows[0]; r.Case != "big" || !strings.Contains(r.Reason, "huge.dcm: implausible pixel data") {
		t.Errorf("%s: reason %q, want case big naming the large file", r.Case, r.Reason)
	}
	if grown := after.TotalAlloc - before.TotalAlloc; grown > declared/2 {
		t.Errorf("the audit allocated %d MiB", grown>>20)
	}
}
