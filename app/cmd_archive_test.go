//go:build cgo

package main

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap/dicomweb"
	"dosecover/dosemap/dicomweb/orthanctest"
	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"
	"dosecover/review"

	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"
)

// waitText waits up to 60 s until the label shows want.
func waitText(t *testing.T, l *widget.Label, want string) {
	t.Helper()
	deadline := time.Now().Add(60 * time.Second)
	for !strings.Contains(l.Text, want) {
		if time.Now().After(deadline) {
			t.Fatalf("label shows %q, want %q", l.Text, want)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// runOut runs a dosecover command and returns its exit code and outputs.
func runOut(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

// TestArchiveRoundTrip runs the commands against a real archive (Debian's
// Orthanc with its DICOMweb plugin): a pydicom-written case is stored by
// STOW-RS, found, retrieved, analysed through its address with the same
// figures as from its folder, its results stored back and found again;
// then a wrong password and a stopped archive fail with exit 1 and a
// message naming the archive.
func TestArchiveRoundTrip(t *testing.T) {
	py := testkit.Python(t)
	srv := orthanctest.Start(t)
	root := t.TempDir()
	src := filepath.Join(root, "sim")
	if _, err := sim.WriteDemo(src); err != nil {
		t.Fatal(err)
	}
	caseDir := filepath.Join(root, "case")
	if err := orthanctest.Resave(py, src, caseDir); err != nil {
		t.Fatal(err)
	}
	var files [][]byte
	filepath.WalkDir(caseDir, func(p string, d os.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			b, _ := os.ReadFile(p)
			files = append(files, b)
		}
		return nil
	})
	c, err := dicomweb.New(srv.URL, dicomweb.Options{Auth: srv.Auth()})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < len(files); i += 200 {
		if err := c.Store(t.Context(), "", files[i:min(i+200, len(files))]); err != nil {
			t.Fatal(err)
		}
	}
	t.Setenv(dicomweb.AuthEnv, srv.Auth())
	t.Setenv("DOSECOVER_CACHE", filepath.Join(root, "cache"))

	// find
	code, out, errs := runOut("archive", "find", srv.URL, "--patient", sim.DemoSession().PatientID, "--json")
	if code != 0 {
		t.Fatalf("archive find: exit %d: %s", code, errs)
	}
	var found []dicomweb.Study
	if err := json.Unmarshal([]byte(out), &found); err != nil || len(found) != 1 || found[0].Instances != len(files) {
		t.Fatalf("archive find --json: %v, %s", err, out)
	}
	study := found[0].UID

	// get, twice: the second fetches nothing
	got := filepath.Join(root, "got")
	if code, out, errs := runOut("archive", "get", srv.URL, study, "-o", got); code != 0 || !strings.Contains(out, "("+strconv.Itoa(len(files))+" fetched") {
		t.Fatalf("archive get: exit %d: %s %s", code, out, errs)
	}
	if code, out, _ := runOut("archive", "get", srv.URL, study, "-o", got); code != 0 || !strings.Contains(out, "(0 fetched") {
		t.Errorf("second archive get: exit %d: %s", code, out)
	}

	// analyse the folder and the address: the same figures
	analyse := func(arg string) *review.Result {
		t.Helper()
		code, out, errs := runOut("analyze", arg, "--trials", "0", "--json", "-")
		if code != 0 {
			t.Fatalf("analyze %s: exit %d: %s", arg, code, errs)
		}
		var r review.Result
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		return &r
	}
	local, remote := analyse(caseDir), analyse(srv.URL+"/studies/"+study)
	figures := func(r *review.Result) string {
		b, _ := json.Marshal([]any{r.Coverage, r.Holes, r.LethalVolumeML, r.OutsideMarginLethalML, r.Sonications})
		return string(b)
	}
	if figures(local) != figures(remote) {
		t.Errorf("figures differ:\nfolder  %s\narchive %s", figures(local), figures(remote))
	}

	// store the results and find them in the study
	resDir := filepath.Join(root, "results")
	code, out, errs = runOut("report", srv.URL+"/studies/"+study, "--trials", "0", "--dicom", resDir, "--store", srv.URL)
	if code != 0 {
		t.Fatalf("report --dicom --store: exit %d: %s", code, errs)
	}
	written, _ := os.ReadDir(resDir)
	_, out, _ = runOut("archive", "find", srv.URL, "--patient", sim.DemoSession().PatientID, "--json")
	found = nil
	json.Unmarshal([]byte(out), &found)
	if len(found) != 1 || found[0].UID != study || found[0].Instances != len(files)+len(written) || !strings.Contains(strings.Join(found[0].Modalities, ","), "DOC") {
		t.Errorf("after storing %d results: %s", len(written), out)
	}
	// Analysed again with its results beside it: the same figures.
	if again := analyse(srv.URL + "/studies/" + study); figures(again) != figures(local) {
		t.Errorf("with the stored results in the study:\n%s\nbefore:\n%s", figures(again), figures(local))
	}

	// audit takes the address too (through the same cache).
	auditOut := filepath.Join(root, "audit")
	if code, _, errs := runOut("audit", srv.URL+"/studies/"+study, "-o", auditOut, "--workers", "1"); code != 0 {
		t.Errorf("audit of a study address: exit %d: %s", code, errs)
	} else if b, err := os.ReadFile(filepath.Join(auditOut, "summary.csv")); err != nil || strings.Count(string(b), "\n") != 2 {
		t.Errorf("audit summary: %v\n%s", err, b)
	}

	// The window: File > Open from archive finds the study, retrieves it
	// and opens it with the same coverage.
	rw := testWindow(t)
	ad := rw.archiveSearch()
	ad.dialog.Show()
	ad.url.SetText(srv.URL)
	ad.patient.SetText(sim.DemoSession().PatientID)
	test.Tap(ad.search)
	waitText(t, ad.status, "1 study found")
	if dir := os.Getenv("DOSECOVER_SCREENSHOT_DIR"); dir != "" {
		writePNG(t, filepath.Join(dir, "archive-dialog.png"), rw.win.Canvas().Capture())
	}
	mark := rw.completed.Load()
	ad.list.Select(0)
	test.Tap(ad.retrieve)
	waitJobs(t, rw, mark, 2)
	if rw.result == nil || math.Abs((*rw.result.CoveredFraction)-(*local.CoveredFraction)) > 1e-9 {
		t.Errorf("opened from the archive in the window: result %+v, status %q; want coverage %.4f", rw.result, rw.status.Text, (*local.CoveredFraction))
	}
	if dir := os.Getenv("DOSECOVER_SCREENSHOT_DIR"); dir != "" {
		writePNG(t, filepath.Join(dir, "opened-from-archive.png"), rw.win.Canvas().Capture())
		rw.storeResults()
		writePNG(t, filepath.Join(dir, "store-results.png"), rw.win.Canvas().Capture())
	}

	// wrong password: exit 1, the archive and the refusal named
	t.Setenv(dicomweb.AuthEnv, srv.User+":not-the-password")
	code, _, errs = runOut("archive", "find", srv.URL)
	if code != 1 || !strings.Contains(errs, srv.URL) || !strings.Contains(errs, "refused") {
		t.Errorf("wrong password: exit %d: %s", code, errs)
	}
	if code, _, errs := runOut("analyze", srv.URL+"/studies/"+study); code != 1 || !strings.Contains(errs, "refused") {
		t.Errorf("analyze with a wrong password: exit %d: %s", code, errs)
	}
	// archive stopped
	t.Setenv(dicomweb.AuthEnv, srv.Auth())
	srv.Stop()
	code, _, errs = runOut("archive", "get", srv.URL, study, "-o", filepath.Join(root, "none"))
	if code != 1 || !strings.Contains(errs, srv.URL) || !strings.Contains(errs, "cannot be reached") {
		t.Errorf("archive stopped: exit %d: %s", code, errs)
	}
}
