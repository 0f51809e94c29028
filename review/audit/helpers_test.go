package audit

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
)

// fakeDICOM returns bytes that start like a DICOM Part 10 file: a 128-byte
// preamble and "DICM" (PS3.10 section 7.1), followed by payload.
func fakeDICOM(payload string) []byte {
	b := make([]byte, 128, 128+4+len(payload))
	b = append(b, "DICM"...)
	return append(b, payload...)
}

// writeFiles creates files below root; names map to contents.
func writeFiles(t testing.TB, root string, files map[string][]byte) {
	t.Helper()
	for name, data := range files {
		p := filepath.Join(root, filepath.FromSlash(name))
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// makeCases writes n case folders case-000... below root, each with
// 1 + k%3 fake DICOM files, and returns root.
func makeCases(t testing.TB, root string, n int) string {
	t.Helper()
	for k := range n {
		files := map[string][]byte{}
		for f := range 1 + k%3 {
			files[fmt.Sprintf("case-%03d/img%d.dcm", k, f)] = fakeDICOM(fmt.Sprintf("case %d file %d", k, f))
		}
		writeFiles(t, root, files)
	}
	return root
}

// fileCounter is an honest fake analysis: it counts the case's files and
// bytes by reading them, fails on a file named FAIL, reports an incomplete
// case on a file named INCOMPLETE and panics on one named PANIC. It counts
// its calls per case and the largest number of calls in flight at once.
type fileCounter struct {
	mu       sync.Mutex
	calls    map[string]int
	inFlight atomic.Int32
	maxSeen  atomic.Int32
	// hold, when not nil, is called inside the analysis with the number of
	// calls in flight (used to prove calls overlap).
	hold func(ctx context.Context, inFlight int32)
}

func newFileCounter() *fileCounter { return &fileCounter{calls: map[string]int{}} }

func (f *fileCounter) total() int {
	f.mu.Lock()
	defer f.mu.Unlock()
	n := 0
	for _, c := range f.calls {
		n += c
	}
	return n
}

func (f *fileCounter) analyze(ctx context.Context, c *Case) (*CaseResult, error) {
	f.mu.Lock()
	f.calls[c.Dir]++
	f.mu.Unlock()
	n := f.inFlight.Add(1)
	defer f.inFlight.Add(-1)
	for {
		m := f.maxSeen.Load()
		if n <= m || f.maxSeen.CompareAndSwap(m, n) {
			break
		}
	}
	if f.hold != nil {
		f.hold(ctx, n)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	var bytes int64
	for _, rel := range c.Files {
		switch filepath.Base(rel) {
		case "FAIL":
			return nil, fmt.Errorf("reading %s: marker file says this case is broken", filepath.Join(c.Dir, rel))
		case "INCOMPLETE":
			return nil, Incomplete("no thermometry series")
		case "PANIC":
			panic("marker file PANIC")
		}
		b, err := os.ReadFile(filepath.Join(c.Dir, filepath.FromSlash(rel)))
		if err != nil {
			return nil, err
		}
		bytes += int64(len(b))
	}
	m := NoMetrics()
	m.CoveragePct = Num(10 * len(c.Files))
	m.OutsideMarginML = Num(float64(bytes) / 1000)
	m.Holes = len(c.Files) - 1
	analysis, _ := json.Marshal(map[string]any{"files": len(c.Files), "bytes": bytes})
	listing := strings.Join(c.Files, "\n")
	return &CaseResult{
		Metrics:  m,
		Flags:    []string{fmt.Sprintf("%d files", len(c.Files))},
		Analysis: analysis,
		Artifacts: []Artifact{{Name: "report.txt", Write: func(w io.Writer) error {
			_, err := io.WriteString(w, listing)
			return err
		}}},
	}, nil
}

// tempFiles lists files below dir with a temporary-file name.
func tempFiles(t testing.TB, dir string) []string {
	t.Helper()
	var out []string
	filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err == nil && !d.IsDir() && (strings.HasSuffix(p, ".tmp") || strings.HasPrefix(d.Name(), tempPrefix)) {
			out = append(out, p)
		}
		return nil
	})
	return out
}

var errStop = errors.New("stop")

// collect lists the files of the case in dir: every regular file below it
// (hidden ones included; symbolic links are not followed), as the input
// hash takes them.
func collect(dir, name string) (Case, error) {
	c := Case{Name: name, Dir: dir}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.Type().IsRegular() {
			return nil
		}
		fi, err := d.Info()
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(dir, p)
		if err != nil {
			return err
		}
		c.Files = append(c.Files, filepath.ToSlash(rel))
		c.Bytes += fi.Size()
		return nil
	})
	if err != nil {
		return Case{}, fmt.Errorf("listing case folder %s: %w", dir, err)
	}
	sort.Strings(c.Files)
	return c, nil
}
