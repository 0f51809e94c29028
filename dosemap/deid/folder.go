package deid

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"

	"github.com/suyashkumar/dicom"

	"dosecover/dosemap/safefile"
)

// FileResult is one de-identified file.
type FileResult struct {
	Src, Dst string
}

// Skipped is a file of the input folder that was not copied, and why.
type Skipped struct {
	Path, Reason string
}

// Result summarises a folder de-identification.
type Result struct {
	Files     []FileResult
	Skipped   []Skipped
	Dates     DateMode
	ShiftDays int // applied offset in DatesShift mode
}

// parse reads the file at path, turning a panic of the DICOM library on a
// malformed file into an error wrapping errParserFailed.
func parse(path string, skipPixels bool) (ds dicom.Dataset, err error) {
	defer func() {
		if r := recover(); r != nil {
			err = errParserFailed // the panic's text means nothing to the user
		}
	}()
	opts := []dicom.ParseOption{dicom.SkipProcessingPixelDataValue()}
	if skipPixels {
		opts = []dicom.ParseOption{dicom.SkipPixelData()}
	}
	return dicom.ParseFile(path, nil, opts...)
}

// File de-identifies the DICOM file src into dst (written atomically).
// The pixel data are copied byte for byte.
func (d *Deidentifier) File(src, dst string) error {
	ds, err := parse(src, false)
	if err != nil {
		return fmt.Errorf("reading %s: %s", src, unreadable(src, err))
	}
	if err := d.Dataset(&ds); err != nil {
		return fmt.Errorf("de-identifying %s: %w", src, err)
	}
	return safefile.WriteFile(dst, func(w io.Writer) error {
		return dicom.Write(w, ds, dicom.SkipVRVerification(), dicom.SkipValueTypeVerification(), dicom.DefaultMissingTransferSyntax())
	})
}

// Folder writes a de-identified copy of every DICOM file under srcDir into
// dstDir, which must be new or empty and must not lie inside srcDir. Files
// are named 00001.dcm, 00002.dcm, ... in the sorted order of their source
// paths (original names may carry identity). Files that are not DICOM are
// not copied and are listed in Result.Skipped, as are symbolic links
// and the files of other studies than Options.Study (a folder of several
// studies and no Options.Study is refused, each study named)
// (not followed); a DICOM file that cannot be de-identified stops the run
// with an error naming it and leaves nothing behind: the copy is written
// into a temporary folder beside dstDir and renamed into place when
// complete.
func Folder(ctx context.Context, srcDir, dstDir string, opt Options, progress func(done, total int)) (*Result, error) {
	if err := safefile.CheckDir("case folder", srcDir); err != nil {
		return nil, err
	}
	if err := safefile.CheckOutside(srcDir, dstDir); err != nil {
		return nil, err
	}
	if in, err := safefile.Within(dstDir, srcDir); err == nil && in {
		return nil, fmt.Errorf("refusing to write into %s: it contains the case folder %s", dstDir, srcDir)
	}
	if fi, err := os.Stat(dstDir); err == nil && !fi.IsDir() {
		return nil, &safefile.PathError{What: "output folder", Path: dstDir, Err: safefile.ErrNotFolder}
	}
	if ents, err := os.ReadDir(dstDir); err == nil {
		if len(ents) > 0 {
			return nil, fmt.Errorf("output folder %s is not empty: give a new or empty folder", dstDir)
		}
	} else if !errors.Is(err, fs.ErrNotExist) {
		return nil, &safefile.PathError{What: "output folder", Path: dstDir, Err: err}
	}
	var paths []string
	var links []Skipped
	err := filepath.WalkDir(srcDir, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return &safefile.PathError{What: "reading", Path: p, Err: err}
		}
		switch {
		case e.Type().IsRegular():
			paths = append(paths, p)
		case e.Type()&fs.ModeSymlink != 0:
			links = append(links, Skipped{Path: p, Reason: "symbolic link, not followed"})
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	sort.Strings(paths)
	d, err := New(opt)
	if err != nil {
		return nil, err
	}
	res := &Result{Dates: opt.Dates, ShiftDays: d.ShiftDays(), Skipped: links}
	// First pass: find the DICOM files and collect the identifying values
	// of the whole case, so that a name in one file is also cleaned from
	// the descriptions of another.
	var dicoms []string
	var sets []dicom.Dataset
	for _, p := range paths {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		ds, err := parse(p, true)
		if err != nil {
			res.Skipped = append(res.Skipped, Skipped{Path: p, Reason: unreadable(p, err)})
			continue
		}
		sets = append(sets, ds)
		dicoms = append(dicoms, p)
	}
	// One copy holds one study: never two patients under one label.
	dicoms, sets, err = oneStudy(dicoms, sets, opt.Study, res)
	if err != nil {
		return nil, err
	}
	for n := range sets {
		d.Collect(&sets[n])
	}
	sets = nil
	if len(dicoms) == 0 {
		return nil, fmt.Errorf("no DICOM file found in %s", srcDir)
	}
	// Write into a temporary folder beside dstDir and rename it into place
	// at the end, so a failed or cancelled run leaves no partial copy.
	parent := filepath.Dir(filepath.Clean(dstDir))
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return nil, &safefile.PathError{What: "creating output folder", Path: parent, Err: err}
	}
	tmp, err := os.MkdirTemp(parent, "."+filepath.Base(filepath.Clean(dstDir))+".part-*")
	if err != nil {
		return nil, &safefile.PathError{What: "creating a temporary folder beside", Path: dstDir, Err: err}
	}
	done := false
	defer func() {
		if !done {
			os.RemoveAll(tmp)
		}
	}()
	for n, p := range dicoms {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		name := fmt.Sprintf("%05d.dcm", n+1)
		if err := d.File(p, filepath.Join(tmp, name)); err != nil {
			return nil, err
		}
		res.Files = append(res.Files, FileResult{Src: p, Dst: filepath.Join(dstDir, name)})
		if progress != nil {
			progress(n+1, len(dicoms))
		}
	}
	if err := os.Chmod(tmp, 0o755); err != nil {
		return nil, fmt.Errorf("writing %s: %w", dstDir, err)
	}
	// dstDir is new or empty (checked above): an empty one makes way.
	if err := os.Remove(dstDir); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("writing %s: %w", dstDir, err)
	}
	if err := os.Rename(tmp, dstDir); err != nil {
		return nil, fmt.Errorf("writing %s: %w", dstDir, err)
	}
	done = true
	return res, nil
}
