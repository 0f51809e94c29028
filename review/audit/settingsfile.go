package audit

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"

	"dosecover/dosemap/safefile"
)

// SettingsFile is the name of the file in the output folder that holds the
// analysis settings of the audit, in canonical JSON (CanonicalSettings).
const SettingsFile = "settings.json"

// SettingsConflictError reports a sharded run refused because its output
// folder holds an audit made with other settings: the shards of one audit
// share one output folder only when they analyse with the same settings,
// so that every record, table and figure in it stands for one set of
// settings.
type SettingsConflictError struct {
	OutDir string // the output folder as given
	Path   string // its settings file
	// Differences lists each setting that differs, as "key: X in
	// settings.json, Y for this shard" (nested keys joined by dots).
	Differences []string
}

// Error names the folder, the differences and what to do.
func (e *SettingsConflictError) Error() string {
	diff := e.Differences
	more := ""
	if len(diff) > 6 {
		more = fmt.Sprintf("; and %d more", len(diff)-6)
		diff = diff[:6]
	}
	return fmt.Sprintf("output folder %s already holds an audit made with other settings (%s): %s%s. "+
		"Shards that share an output folder must use the same settings: give this shard the settings "+
		"of that audit (--settings), or choose another output folder",
		e.OutDir, e.Path, strings.Join(diff, "; "), more)
}

// sharedSettings makes outDir/settings.json hold settings (canonical JSON)
// for a sharded run: it writes the file when absent and otherwise accepts
// it only when it holds the same settings, returning a
// *SettingsConflictError when not. When write is false it only checks.
// Shards starting at the same moment cannot both write: the file is
// created only when absent (createAtomic).
func sharedSettings(outDir, given string, settings []byte, write bool) error {
	p := filepath.Join(outDir, SettingsFile)
	for {
		old, err := readSettingsFile(p)
		switch {
		case err == nil:
			return compareSettings(given, p, old, settings)
		case !errors.Is(err, fs.ErrNotExist):
			return fmt.Errorf("output folder %s: %w; remove it or choose another output folder", given, err)
		case !write:
			return nil
		}
		created, err := createAtomic(p, func(w io.Writer) error {
			_, err := w.Write(append(settings, '\n'))
			return err
		})
		if err != nil || created {
			return err
		}
		// Another shard wrote it first: compare with what it wrote.
	}
}

// readSettingsFile returns the canonical form of the settings in p.
func readSettingsFile(p string) ([]byte, error) {
	b, err := os.ReadFile(p)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, err
		}
		return nil, &safefile.PathError{What: "reading", Path: p, Err: err}
	}
	c, err := CanonicalSettings(b)
	if err != nil {
		return nil, fmt.Errorf("reading %s: %w", p, err)
	}
	return c, nil
}

// compareSettings returns nil when the canonical settings old (stored in
// p) and cur are the same, and a *SettingsConflictError listing the
// differences otherwise.
func compareSettings(outDir, p string, old, cur []byte) error {
	if bytes.Equal(old, cur) {
		return nil
	}
	var a, b any
	if err := decodeNumbers(old, &a); err != nil {
		return fmt.Errorf("reading %s: %w", p, err)
	}
	if err := decodeNumbers(cur, &b); err != nil {
		return err
	}
	e := &SettingsConflictError{OutDir: outDir, Path: p}
	diffJSON("", a, b, &e.Differences)
	return e
}

func decodeNumbers(b []byte, v any) error {
	d := json.NewDecoder(bytes.NewReader(b))
	d.UseNumber()
	return d.Decode(v)
}

// diffJSON appends to out one line per leaf value that differs between a
// (the stored settings) and b (this run's), objects compared key by key.
func diffJSON(path string, a, b any, out *[]string) {
	am, aok := a.(map[string]any)
	bm, bok := b.(map[string]any)
	if aok && bok {
		keys := map[string]bool{}
		for k := range am {
			keys[k] = true
		}
		for k := range bm {
			keys[k] = true
		}
		sorted := make([]string, 0, len(keys))
		for k := range keys {
			sorted = append(sorted, k)
		}
		sort.Strings(sorted)
		for _, k := range sorted {
			sub := k
			if path != "" {
				sub = path + "." + k
			}
			av, ain := am[k]
			bv, bin := bm[k]
			switch {
			case !ain:
				*out = append(*out, fmt.Sprintf("%s: absent in settings.json, %s for this shard", sub, compact(bv)))
			case !bin:
				*out = append(*out, fmt.Sprintf("%s: %s in settings.json, absent for this shard", sub, compact(av)))
			default:
				diffJSON(sub, av, bv, out)
			}
		}
		return
	}
	if !reflect.DeepEqual(a, b) {
		name := path
		if name == "" {
			name = "settings"
		}
		*out = append(*out, fmt.Sprintf("%s: %s in settings.json, %s for this shard", name, compact(a), compact(b)))
	}
}

func compact(v any) string {
	b, err := json.Marshal(v)
	if err != nil {
		return fmt.Sprint(v)
	}
	return string(b)
}
