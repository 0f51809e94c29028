// The archive round trips do not depend on the vector kernels: they run
// once, in the pass without the purego tag.

//go:build !purego

package dicomweb

import (
	"bytes"
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/dicomweb/orthanctest"
	"dosecover/dosemap/sim"
)

// upload stores the files in batches of 200 by STOW-RS and returns the
// study found for the demo patient.
func upload(t testing.TB, c *Client, files [][]byte) Study {
	t.Helper()
	ctx := context.Background()
	for i := 0; i < len(files); i += 200 {
		if err := c.Store(ctx, "", files[i:min(i+200, len(files))]); err != nil {
			t.Fatalf("STOW-RS: %v", err)
		}
	}
	found, err := c.FindStudies(ctx, Query{PatientID: sim.DemoSession().PatientID})
	if err != nil {
		t.Fatal(err)
	}
	if len(found) != 1 {
		t.Fatalf("found %d studies for the demo patient, want 1: %+v", len(found), found)
	}
	return found[0]
}

// readFolder returns the files of dir by name.
func readFolder(t testing.TB, dir string) map[string][]byte {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	out := map[string][]byte{}
	for _, e := range ents {
		b, err := os.ReadFile(filepath.Join(dir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		out[e.Name()] = b
	}
	return out
}

// TestOrthancRoundTrip stores a pydicom-written case in Orthanc (STOW-RS),
// finds it (QIDO-RS), retrieves it (WADO-RS) and checks every file comes
// back byte for byte under its SOP Instance UID; a second retrieval
// fetches only what is missing, and the archive is left unchanged.
func TestOrthancRoundTrip(t *testing.T) {
	_, files := demoCase(t)
	srv := orthanctest.Start(t)
	c, err := New(srv.URL, Options{Auth: srv.Auth()})
	if err != nil {
		t.Fatal(err)
	}
	st := upload(t, c, files)
	demo := sim.DemoSession()
	// The counts and names are the ones the case was written with.
	if st.Instances != len(files) || st.PatientName != demo.PatientName || !validUID(st.UID) {
		t.Errorf("study found: %+v; want %d instances, patient %q", st, len(files), demo.PatientName)
	}
	if st.Series != 17 { // anatomy, 15 sonications, structures (sim.DemoSession)
		t.Errorf("study has %d series, want 17", st.Series)
	}
	if len(st.Modalities) == 0 || !strings.Contains(strings.Join(st.Modalities, ","), "MR") {
		t.Errorf("modalities %v, want MR among them", st.Modalities)
	}
	// Search filters: a name part matches, a date range before the study does not.
	if got, err := c.FindStudies(t.Context(), Query{Name: demo.PatientName[1:4]}); err != nil || len(got) != 1 {
		t.Errorf("search by name part %q: %v, %v", demo.PatientName[1:4], got, err)
	}
	if got, err := c.FindStudies(t.Context(), Query{From: "19000101", To: "19001231"}); err != nil || len(got) != 0 {
		t.Errorf("search by a date range before the study: %v, %v", got, err)
	}
	before := srv.Count(t)

	dir := filepath.Join(t.TempDir(), "got")
	var last [2]int
	stats, err := c.Retrieve(t.Context(), st.UID, dir, RetrieveOptions{Progress: func(d, n int) { last = [2]int{d, n} }})
	if err != nil {
		t.Fatal(err)
	}
	if stats.Fetched != len(files) || stats.Present != 0 || last != [2]int{len(files), len(files)} {
		t.Errorf("first retrieval: %+v, last progress %v; want %d fetched", stats, last, len(files))
	}
	got := readFolder(t, dir)
	if len(got) != len(files) {
		t.Fatalf("%d files retrieved, want %d", len(got), len(files))
	}
	for _, f := range files {
		sop, err := SOPInstanceUID(f)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got[sop+FileExt], f) {
			t.Errorf("%s%s differs from the file stored", sop, FileExt)
		}
	}
	// Resume: remove two files; only those come again.
	names := make([]string, 0, 2)
	for n := range got {
		if len(names) < 2 {
			names = append(names, n)
		}
	}
	for _, n := range names {
		os.Remove(filepath.Join(dir, n))
	}
	stats, err = c.Retrieve(t.Context(), st.UID, dir, RetrieveOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if stats.Fetched != 2 || stats.Present != len(files)-2 {
		t.Errorf("second retrieval: %+v, want 2 fetched and %d present", stats, len(files)-2)
	}
	if after := srv.Count(t); after != before {
		t.Errorf("the archive holds %d instances after retrieval, %d before", after, before)
	}

	// Through the cache: same files.
	k := &Cache{Root: t.TempDir(), Limit: 1 << 40}
	cdir, err := k.Fetch(t.Context(), c, StudyURL{Base: srv.URL, Study: st.UID}, RetrieveOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if n := len(readFolder(t, cdir)); n != len(files) {
		t.Errorf("cache folder holds %d files, want %d", n, len(files))
	}
}

// TestOrthancRefusals: a wrong password is refused with a message naming
// the archive; an archive that is stopped cannot be reached.
func TestOrthancRefusals(t *testing.T) {
	srv := orthanctest.Start(t)
	bad, err := New(srv.URL, Options{Auth: srv.User + ":wrong"})
	if err != nil {
		t.Fatal(err)
	}
	_, err = bad.FindStudies(t.Context(), Query{})
	var ae *Error
	if !errors.As(err, &ae) || !ae.Refused() || !strings.Contains(err.Error(), srv.URL) || !strings.Contains(err.Error(), "refused") {
		t.Errorf("wrong password: %v; want a refusal naming %s", err, srv.URL)
	}
	none, _ := New(srv.URL, Options{})
	if _, err := none.FindStudies(t.Context(), Query{}); !errors.As(err, &ae) || ae.Status != 401 {
		t.Errorf("no credentials: %v; want 401", err)
	}
	good, _ := New(srv.URL, Options{Auth: srv.Auth()})
	if _, err := good.FindStudies(t.Context(), Query{}); err != nil {
		t.Fatalf("right password: %v", err)
	}
	srv.Stop()
	_, err = good.FindStudies(t.Context(), Query{})
	if !errors.As(err, &ae) || ae.Status != 0 || !strings.Contains(err.Error(), "cannot be reached") {
		t.Errorf("archive stopped: %v; want \"cannot be reached\"", err)
	}
}

// TestOrthancInstanceLost deletes an instance from the archive while the
// study is being retrieved: the retrieval fails, and the cache gives no
// folder.
func TestOrthancInstanceLost(t *testing.T) {
	_, files := demoCase(t)
	srv := orthanctest.Start(t)
	c, err := New(srv.URL, Options{Auth: srv.Auth(), Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	st := upload(t, c, files)
	list, err := c.Instances(t.Context(), st.UID)
	if err != nil {
		t.Fatal(err)
	}
	victim := list[len(list)-1].SOP // last series in order: not fetched yet at the first file
	deleted := false
	k := &Cache{Root: t.TempDir()}
	dir, err := k.Fetch(t.Context(), c, StudyURL{Base: srv.URL, Study: st.UID}, RetrieveOptions{Progress: func(d, n int) {
		if d == 1 && !deleted {
			deleted = true
			srv.Delete(t, victim)
		}
	}})
	if err == nil || dir != "" {
		t.Fatalf("retrieval while an instance is deleted: folder %q, error %v; want an error and no folder", dir, err)
	}
	if !strings.Contains(err.Error(), "changed during retrieval") {
		t.Errorf("error %q does not say the study changed", err)
	}
}
