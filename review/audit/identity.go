package audit

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"syscall"

	"dosecover/dosemap/safefile"
)

// IdentityFile is the name of the file in the output folder that says
// whether the audit's records are de-identified: {"deidentified": true}.
const IdentityFile = "identity.json"

// IdentityConflictError reports a run refused because its output folder
// holds records of the other kind: a de-identified audit must never share
// a folder with records that carry identity (the folder would be passed on
// as de-identified), and an identified audit is not mixed into a
// de-identified one.
type IdentityConflictError struct {
	OutDir       string // the output folder as given
	Deidentified bool   // what this run would write
	Example      string // a record or file of the other kind, relative to OutDir
}

// Error names the folder, what it holds and what to do.
func (e *IdentityConflictError) Error() string {
	have, want := "identified", "de-identified"
	if !e.Deidentified {
		have, want = want, have
	}
	return fmt.Sprintf("output folder %s holds %s records (%s); a %s audit must not share it: choose another output folder, or remove its contents",
		e.OutDir, have, e.Example, want)
}

type identity struct {
	Deidentified bool `json:"deidentified"`
}

// checkIdentity refuses (IdentityConflictError) an output folder whose
// identity file or case records say the other kind than deid.
func checkIdentity(outDir, given string, deid bool) error {
	p := filepath.Join(outDir, IdentityFile)
	b, err := os.ReadFile(p)
	switch {
	case err == nil:
		var id identity
		if err := json.Unmarshal(b, &id); err != nil {
			return fmt.Errorf("output folder %s: %s is not an identity file of dosecover (not valid JSON); remove it or choose another output folder", given, IdentityFile)
		}
		if id.Deidentified != deid {
			return &IdentityConflictError{OutDir: given, Deidentified: deid, Example: IdentityFile}
		}
	case errors.Is(err, fs.ErrNotExist) || errors.Is(err, syscall.ENOTDIR):
		// No audit there yet (or no folder: creating it says why).
	default:
		return fmt.Errorf("output folder %s: %s cannot be read (%s); remove it or choose another output folder", given, IdentityFile, safefile.Reason(err))
	}
	// Folders written before the identity file existed: the records say.
	recs, _ := filepath.Glob(filepath.Join(outDir, "cases", "*", RecordFile))
	for _, r := range recs {
		rec, err := ReadRecord(r)
		if err == nil && rec.Deidentified != deid {
			rel, _ := filepath.Rel(outDir, r)
			return &IdentityConflictError{OutDir: given, Deidentified: deid, Example: rel}
		}
	}
	return nil
}

// claimIdentity records deid in the output folder's identity file; for
// shards the file is created only when absent (shards starting together
// cannot both write it) and then checked.
func claimIdentity(outDir, given string, deid, sharded bool) error {
	b, _ := json.Marshal(identity{deid})
	fill := func(w io.Writer) error {
		_, err := w.Write(append(b, '\n'))
		return err
	}
	p := filepath.Join(outDir, IdentityFile)
	if !sharded {
		return writeAtomic(p, fill)
	}
	if _, err := createAtomic(p, fill); err != nil {
		return err
	}
	return checkIdentity(outDir, given, deid)
}
