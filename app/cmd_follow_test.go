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
	"testing"
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
