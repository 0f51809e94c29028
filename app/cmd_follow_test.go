//go:build cgo

package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/dicomweb"
	"dosecover/dosemap/dicomweb/orthanctest"
	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"
)

// TestFollowCommandJSONLines: follow on a folder that holds a whole case
// already prints JSON lines whose last one holds every field of analyze's
// JSON result with the same value, plus sonications_analysed; it ends by
// itself with --until-idle.
func TestFollowCommandJSONLines(t *testing.T) {
	dir := demoCase(t)
	var out, errb bytes.Buffer
	if code := run([]string{"follow", "--json-lines", "--until-idle", "1", "--quiet", "1", "--trials", "5", dir}, &out, &errb); code != 0 {
		t.Fatalf("follow: exit %d\n%s", code, errb.String())
	}
	var last map[string]any
	sc := bufio.NewScanner(&out)
	sc.Buffer(nil, 64<<20)
	lines := 0
	for sc.Scan() {
		lines++
		last = nil
		if err := json.Unmarshal(sc.Bytes(), &last); err != nil {
			t.Fatalf("line %d is not one JSON object: %v", lines, err)
		}
	}
	if lines == 0 {
		t.Fatalf("no update printed; stderr:\n%s", errb.String())
	}
	if n, _ := last["sonications_analysed"].(float64); n != 3 {
		t.Errorf("sonications_analysed %v, want 3", last["sonications_analysed"])
	}
	if !strings.Contains(errb.String(), "idle for 1s; 3 sonication(s) analysed") {
		t.Errorf("end not reported: %s", errb.String())
	}
	var ab, ae bytes.Buffer
	if code := run([]string{"analyze", "--json", "-", "--trials", "5", dir}, &ab, &ae); code != 0 {
		t.Fatalf("analyze: exit %d\n%s", code, ae.String())
	}
	var want map[string]any
	if err := json.Unmarshal(ab.Bytes(), &want); err != nil {
		t.Fatal(err)
	}
	for k, v := range want {
		if !reflect.DeepEqual(last[k], v) {
			t.Errorf("field %q differs from analyze's:\nfollow:  %.300v\nanalyze: %.300v", k, last[k], v)
		}
	}
}

// TestFollowCommandErrors: usage errors exit 2, a folder that is not there
// exits 1 naming it.
func TestFollowCommandErrors(t *testing.T) {
	missing := filepath.Join(t.TempDir(), "nowhere")
	file := filepath.Join(t.TempDir(), "file")
	os.WriteFile(file, []byte("x"), 0o644)
	for _, tc := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"follow"}, 2, "one folder expected"},
		{[]string{"follow", "--until-idle", "-1", t.TempDir()}, 2, "--until-idle"},
		{[]string{"follow", "--quiet", "x", t.TempDir()}, 2, "quiet"},
		{[]string{"follow", "--margin", "-1", t.TempDir()}, 2, "margin"},
		{[]string{"follow", missing}, 1, "nowhere"},
		{[]string{"follow", file}, 1, "file"},
	} {
		var out, errb bytes.Buffer
		if code := run(tc.args, &out, &errb); code != tc.code || !strings.Contains(errb.String(), tc.want) {
			t.Errorf("%v: exit %d, want %d; stderr %q should name %q", tc.args, code, tc.code, errb.String(), tc.want)
		}
	}
}

// syncBuffer is a bytes.Buffer safe for a writer and a reader on other
// goroutines.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// TestFollowArchiveStudy follows a study on a real archive (Debian's
// Orthanc with its DICOMweb plugin) while it grows: a pydicom-written case
// is stored with its first sonication, then its second once the first is
// analysed. follow URL/studies/UID retrieves the new instances, prints one
// update per sonication, and its last line equals analyze's JSON of the
// study retrieved.
func TestFollowArchiveStudy(t *testing.T) {
	py := testkit.Python(t)
	srv := orthanctest.Start(t)
	root := t.TempDir()
	src := filepath.Join(root, "sim")
	s := sim.DemoSession()
	s.Sonications = s.Sonications[:2]
	s.Motion = nil
	if _, err := sim.WriteSession(src, s); err != nil {
		t.Fatal(err)
	}
	caseDir := filepath.Join(root, "case")
	if err := orthanctest.Resave(py, src, caseDir); err != nil {
		t.Fatal(err)
	}
	// The files of the second sonication (its series start last) go to
	// the archive after the first update.
	type file struct {
		data   []byte
		start  float64
		thermo bool
		series string
	}
	var files []file
	study := ""
	filepath.WalkDir(caseDir, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		h, err := dicomio.ReadHeader(p)
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		b, _ := os.ReadFile(p)
		study = h.Study
		files = append(files, file{b, h.FirstTime, h.TemporalPositions > 1, h.Series})
		return nil
	})
	last := ""
	lastStart := -1.0
	for _, f := range files {
		if f.thermo && f.start > lastStart {
			last, lastStart = f.series, f.start
		}
	}
	var first, second [][]byte
	for _, f := range files {
		if f.thermo && f.series == last {
			second = append(second, f.data)
		} else {
			first = append(first, f.data)
		}
	}
	if len(second) == 0 || len(first) == 0 {
		t.Fatalf("cannot split the case: %d and %d files", len(first), len(second))
	}
	c, err := dicomweb.New(srv.URL, dicomweb.Options{Auth: srv.Auth()})
	if err != nil {
		t.Fatal(err)
	}
	store := func(fs [][]byte) {
		for i := 0; i < len(fs); i += 200 {
			if err := c.Store(t.Context(), study, fs[i:min(i+200, len(fs))]); err != nil {
				t.Fatal(err)
			}
		}
	}
	store(first)
	t.Setenv(dicomweb.AuthEnv, srv.Auth())
	t.Setenv("DOSECOVER_CACHE", filepath.Join(root, "cache"))
	var out, errb syncBuffer
	done := make(chan int, 1)
	addr := srv.URL + "/studies/" + study
	go func() {
		done <- run([]string{"follow", "--json-lines", "--until-idle", "8", "--poll", "0.5", "--quiet", "1", "--trials", "0", addr}, &out, &errb)
	}()
	deadline := time.Now().Add(2 * time.Minute)
	for !strings.Contains(out.String(), `"sonications_analysed":1`) {
		if time.Now().After(deadline) {
			t.Fatalf("no update for the first sonication within 2 minutes; stderr:\n%s", errb.String())
		}
		time.Sleep(50 * time.Millisecond)
	}
	store(second)
	if code := <-done; code != 0 {
		t.Fatalf("follow: exit %d\n%s", code, errb.String())
	}
	lines := strings.Split(strings.TrimSpace(out.String()), "\n")
	if len(lines) != 2 {
		t.Fatalf("%d updates, want 2; stderr:\n%s", len(lines), errb.String())
	}
	var got, want map[string]any
	if err := json.Unmarshal([]byte(lines[1]), &got); err != nil {
		t.Fatal(err)
	}
	if n, _ := got["sonications_analysed"].(float64); n != 2 {
		t.Errorf("last update: %v sonications analysed, want 2", got["sonications_analysed"])
	}
	cached, err := dicomweb.DefaultCache()
	if err != nil {
		t.Fatal(err)
	}
	su, _, _ := dicomweb.ParseStudyURL(addr)
	var ab, ae bytes.Buffer
	if code := run([]string{"analyze", "--json", "-", "--trials", "0", cached.Folder(su)}, &ab, &ae); code != 0 {
		t.Fatalf("analyze of the retrieved study: exit %d\n%s", code, ae.String())
	}
	if err := json.Unmarshal(ab.Bytes(), &want); err != nil {
		t.Fatal(err)
	}
	for k, v := range want {
		if !reflect.DeepEqual(got[k], v) {
			t.Errorf("field %q differs from analyze's:\nfollow:  %.300v\nanalyze: %.300v", k, got[k], v)
		}
	}
}
