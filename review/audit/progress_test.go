package audit

import (
	"bytes"
	"os"
	"strings"
	"testing"
	"time"
)

func TestProgressPrinter(t *testing.T) {
	steps := []Progress{
		{Phase: "discovering"},
		{Phase: "analysing", Total: 4},
		{Phase: "analysing", Total: 4, Done: 1, Elapsed: 2 * time.Second, ETA: 6 * time.Second, Last: &Row{Case: "c1", Status: StatusOK, Seconds: 2}},
		{Phase: "analysing", Total: 4, Done: 2, Failed: 1, Elapsed: 3 * time.Second, ETA: 3 * time.Second, Last: &Row{Case: "c2", Status: StatusFailed, Reason: "reading x.dcm: bad tag\nstack"}},
		{Phase: "analysing", Total: 4, Done: 3, Failed: 1, Resumed: 1, Last: &Row{Case: "c3", Status: StatusOK, Resumed: true}},
		{Phase: "analysing", Total: 4, Done: 4, Failed: 1, Resumed: 1, Last: &Row{Case: "c4", Status: StatusOK, Seconds: 1}},
		{Phase: "summarising", Total: 4, Done: 4, Failed: 1, Resumed: 1},
	}
	var plain bytes.Buffer
	p := ProgressPrinter(&plain, false)
	for _, s := range steps {
		p(s)
	}
	want := `audit: looking for cases
audit: 4 cases to do
audit: [1/4] c1 ok (2.0 s), about 6s left
audit: [2/4] c2 failed: reading x.dcm: bad tag, about 3s left
audit: [3/4] c3 ok (earlier run)
audit: [4/4] c4 ok (1.0 s)
audit: 4 cases done (1 from an earlier run), 0 incomplete, 1 failed; writing the summary
`
	if plain.String() != want {
		t.Errorf("plain progress:\n%s\nwant:\n%s", plain.String(), want)
	}

	var tty bytes.Buffer
	p = ProgressPrinter(&tty, true)
	for _, s := range steps {
		p(s)
	}
	out := tty.String()
	for _, w := range []string{
		"\r\033[K[#######.......................] 1/4  incomplete 0  failed 0  elapsed 2s  left 6s",
		"\r\033[Kaudit: c2 failed: reading x.dcm: bad tag\n[###############...............] 2/4",
		"[##############################] 4/4",
	} {
		if !strings.Contains(out, w) {
			t.Errorf("terminal progress lacks %q:\n%q", w, out)
		}
	}
	if strings.Count(out, "\n") != 4 { // discovery, count, one failure, summary
		t.Errorf("terminal progress has %d lines, want 4:\n%q", strings.Count(out, "\n"), out)
	}
}

func TestIsTerminal(t *testing.T) {
	f, err := os.CreateTemp(t.TempDir(), "log")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if IsTerminal(f) {
		t.Error("a regular file counts as a terminal")
	}
	if null, err := os.Open(os.DevNull); err == nil {
		// /dev/null is a character device, as terminals are; Stat cannot tell
		// them apart, which is harmless for progress output.
		defer null.Close()
		if !IsTerminal(null) {
			t.Errorf("%s is not reported as a character device", os.DevNull)
		}
	}
}
