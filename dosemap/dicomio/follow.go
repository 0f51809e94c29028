package dicomio

import (
	"context"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/safefile"
)

// Header is what a folder watcher needs of one file to tell when a series
// is complete: its identity, the time points it declares and the frames it
// holds. ReadHeader reads it without the pixel data.
type Header struct {
	Path              string
	Study, Series     string // StudyInstanceUID, SeriesInstanceUID
	Instance          string // SOPInstanceUID
	Modality          string
	Image             bool // holds image frames
	StructureSet      bool // an RTSTRUCT with at least one ROI
	TemporalPositions int  // NumberOfTemporalPositions (0020,0105); 0 absent
	Frames            []HeaderFrame
	Size              int64     // file size when read
	ModTime           time.Time // modification time when read
	FirstTime         float64   // earliest frame time (as HeaderFrame.Time) when HasTime
	HasTime           bool
}

// HeaderFrame is one image frame of a Header.
type HeaderFrame struct {
	TemporalPos int     // TemporalPositionIdentifier / Index; 0 none
	Component   string  // "P" phase, "M" magnitude, "R", "I" or "" (from ImageType, FrameType, ComplexImageComponent)
	Position    [3]int  // ImagePositionPatient in hundredths of a mm (the slice it belongs to)
	Time        float64 // frame time, seconds (since 1970-01-01, or of the day when undated); NaN unknown
}

// ReadHeader reads the attributes of the file at path (pixel data skipped).
// The error gives the reason the file cannot be used, as the Inventory
// would list it (not DICOM, truncated, unsupported...).
func ReadHeader(path string) (*Header, error) {
	fi, err := readFile(path, false)
	if err != nil {
		return nil, errors.New(skipReason(err))
	}
	h := &Header{Path: path, Study: fi.StudyUID, Series: fi.SeriesUID, Instance: fi.SOPInstance,
		Modality: fi.Modality, Image: fi.IsImage, StructureSet: fi.Structures != nil,
		TemporalPositions: fi.TemporalPositions, Size: fi.Size, ModTime: fi.ModTime}
	if fi.IsImage {
		h.Frames = make([]HeaderFrame, len(fi.Frames))
		for n, f := range fi.Frames {
			hf := HeaderFrame{TemporalPos: f.TemporalPos, Component: f.Component, Time: math.NaN()}
			for a := 0; a < 3; a++ {
				if v := f.IPP[a]; v == v {
					hf.Position[a] = int(math.Round(v * 100))
				}
			}
			if f.Time.OK {
				hf.Time = f.Time.abs()
				if !h.HasTime || hf.Time < h.FirstTime {
					h.FirstTime, h.HasTime = hf.Time, true
				}
			}
			h.Frames[n] = hf
		}
	}
	return h, nil
}

// LoadFiles is Load restricted to the files paths under dir (a folder
// still being filled, whose other files are incomplete or read already).
// The paths are named as dir is (both absolute, or both relative to the
// working directory).
// The Inventory counts and lists these files only.
func LoadFiles(ctx context.Context, dir string, paths []string, opt LoadOptions, progress func(done, total int)) (*dosemap.Case, *Inventory, error) {
	if err := safefile.CheckDir("case folder", dir); err != nil {
		return nil, nil, err
	}
	ps := make([]string, 0, len(paths))
	for _, p := range paths {
		if r, err := filepath.Rel(dir, p); err != nil || !filepath.IsLocal(r) {
			return nil, nil, fmt.Errorf("%s is not inside the case folder %s", p, dir)
		}
		ps = append(ps, p)
	}
	sort.Strings(ps)
	cr, err := scanPaths(ctx, dir, ps, nil, opt, progress)
	if err != nil {
		return nil, nil, err
	}
	c, err := cr.load(ctx, progress)
	if err != nil {
		return nil, nil, err
	}
	return c, cr.inv, nil
}
