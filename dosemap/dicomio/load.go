package dicomio

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"sync"

	"dosecover/dosemap"
)

// target is where one frame's pixels go: value = A*stored + B.
type target struct {
	frame int
	dst   []float32
	a, b  float64
}

// load reads the pixel data of the files the case uses.
func (cr *caseReader) load(ctx context.Context, progress func(done, total int)) (*dosemap.Case, error) {
	inv := cr.inv
	c := &dosemap.Case{Label: filepath.Base(filepath.Clean(cr.dir)), Patient: cr.patient, StudyUID: cr.inv.Study}
	// A study chosen among several is labelled by its own folder, or by
	// the folder read and its date when it shares that folder.
	if len(inv.Studies) > 1 {
		for _, s := range inv.Studies {
			if s.Used && s.Folder != "." {
				c.Label = filepath.Base(s.Folder)
			} else if s.Used {
				c.Label += " (study of " + studyDateText(s.Date) + ")"
			}
		}
	}
	plan := map[*fileInfo][]target{}
	nan := float32(math.NaN())
	// alloc returns one []float32 per time point of st, with missing frames
	// NaN, and schedules the decoding of the present ones.
	alloc := func(st *stack, conv func(m *frameMeta, fi *fileInfo) (a, b float64), times []int) [][]float32 {
		g := st.Geometry
		sl := g.SliceLen()
		var out [][]float32
		for _, t := range times {
			buf := make([]float32, g.Len())
			for k, r := range st.Grid[t] {
				dst := buf[k*sl : (k+1)*sl]
				if r == nil {
					for n := range dst {
						dst[n] = nan
					}
					continue
				}
				a, b := conv(r.meta(), r.fi)
				plan[r.fi] = append(plan[r.fi], target{frame: r.n, dst: dst, a: a, b: b})
			}
			out = append(out, buf)
		}
		return out
	}
	all := func(st *stack) []int {
		ts := make([]int, len(st.Grid))
		for n := range ts {
			ts[n] = n
		}
		return ts
	}
	rescale := func(m *frameMeta, _ *fileInfo) (float64, float64) { return m.Slope, m.Intercept }
	if s := cr.anatomy; s != nil {
		v := alloc(s.image, rescale, []int{0})
		c.Anatomy = &dosemap.Volume{Geometry: s.image.Geometry, Data: v[0]}
		c.FrameOfRef = s.info.FrameOfRef
		f0 := s.files[0]
		c.WindowCenter, c.WindowWidth = f0.WindowCenter, f0.WindowWidth
		if s.files[0].Patient != (dosemap.Patient{}) {
			c.Patient = s.files[0].Patient
		}
	}
	phaseConv := func(m *frameMeta, fi *fileInfo) (float64, float64) {
		if cr.opt.PhaseScale == 0 {
			for _, r := range m.RWV {
				if r.Units == "rad" {
					return r.Slope, r.Intercept
				}
			}
		}
		return fi.phaseLinear(cr.opt.PhaseScale)
	}
	mapConv := func(want func(rwv) bool) func(m *frameMeta, fi *fileInfo) (float64, float64) {
		return func(m *frameMeta, fi *fileInfo) (float64, float64) {
			for _, r := range m.RWV {
				if want(r) {
					return r.Slope, r.Intercept
				}
			}
			return m.Slope, m.Intercept
		}
	}
	for _, u := range cr.units {
		s := &dosemap.Sonication{
			Number: u.info.Number, Label: u.info.Label, SeriesUID: u.phase.info.UID,
			FrameOfRef: u.phase.info.FrameOfRef, Geometry: u.data.Geometry,
			Start: u.info.Start, Times: u.data.relTimes(), B0: u.info.B0, TE: u.info.TE,
		}
		switch u.kind {
		case "phase":
			if cr.opt.Deferred {
				s.Source = cr.newFrameSource(u.data, u.mag, phaseConv, rescale)
			} else {
				s.Phase = alloc(u.data, phaseConv, all(u.data))
				if u.mag != nil {
					s.Magnitude = alloc(u.mag, rescale, all(u.mag))
				}
			}
			for _, us := range u.stacks {
				e := &dosemap.Sonication{
					Number: u.info.Number, Label: u.info.Label, SeriesUID: us.s.info.UID,
					FrameOfRef: us.s.info.FrameOfRef, Geometry: us.data.Geometry,
					Start: u.info.Start, Times: us.data.relTimes(), B0: u.info.B0, TE: u.info.TE,
				}
				if us.data.HasTimes && len(us.data.Times) > 0 {
					e.Start = toTime(us.data.Times[0], us.data.Dated)
				}
				if us.s.info.B0 > 0 {
					e.B0 = us.s.info.B0
				}
				if us.s.info.TE > 0 {
					e.TE = us.s.info.TE
				}
				if cr.opt.Deferred {
					e.Source = cr.newFrameSource(us.data, us.mag, phaseConv, rescale)
				} else {
					e.Phase = alloc(us.data, phaseConv, all(us.data))
					if us.mag != nil {
						e.Magnitude = alloc(us.mag, rescale, all(us.mag))
					}
				}
				s.Stacks = append(s.Stacks, e)
			}
		case "temperature":
			s.Temperature = alloc(u.data, mapConv(func(r rwv) bool { return r.Units == "Cel" }), all(u.data))
		case "dose":
			last := len(u.data.Grid) - 1
			s.Dose = alloc(u.data, mapConv(func(r rwv) bool { return strings.EqualFold(r.Label, "CEM43") }), []int{last})[0]
			s.Times = []float64{0}
		}
		c.Sonications = append(c.Sonications, s)
	}
	for _, ss := range cr.structs {
		c.Structures = append(c.Structures, ss.Structures...)
	}
	files := make([]*fileInfo, 0, len(plan))
	for _, s := range cr.series {
		for _, fi := range s.files {
			if _, ok := plan[fi]; ok {
				files = append(files, fi)
			}
		}
	}
	paths := make([]string, len(files))
	for n, fi := range files {
		paths[n] = fi.Path
	}
	errs := make([]error, len(files))
	err := readAll(ctx, paths, cr.opt.workers(), progress, func(i int) {
		errs[i] = decodeFile(files[i], plan[files[i]], nil)
	})
	if err != nil {
		return nil, err
	}
	for i, e := range errs {
		if e != nil {
			inv.Skipped = append(inv.Skipped, SkippedFile{Path: cr.rel(paths[i]), Reason: "pixel data: " + e.Error()})
			inv.problem("%s: pixel data could not be read (%v); its frames are marked not monitored", cr.rel(paths[i]), e)
		}
	}
	return c, nil
}

// pixelBuffers holds the reused buffers of the pixel pass.
var pixelBuffers sync.Pool

// decodeFile reads the pixel data of fi and decodes the frames ts asks
// for (with the value tables tabs, which may be nil); when the pixels cannot be read, those frames are NaN and the error
// says why.
func decodeFile(fi *fileInfo, ts []target, tabs *valueTables) error {
	var buf []byte
	if b, ok := pixelBuffers.Get().(*[]byte); ok {
		buf = *b
	}
	lo, hi := len(fi.Frames), -1
	for _, t := range ts {
		lo, hi = min(lo, t.frame), max(hi, t.frame)
	}
	var px *fileInfo
	var err error
	if hi >= lo {
		px, err = fi.loadPixels(buf, lo, hi)
	}
	nan := float32(math.NaN())
	for _, t := range ts {
		if err != nil {
			for n := range t.dst {
				t.dst[n] = nan
			}
			continue
		}
		px.decodeFrame(t.frame, t.dst, t.a, t.b, tabs)
	}
	if px != nil && px.pooled {
		b := px.Pixels[:0]
		pixelBuffers.Put(&b)
	}
	return err
}

// loadPixels returns a copy of fi holding the raw pixel data of frames lo
// to hi (fi itself is not changed, so that files can be read again
// concurrently); only those frames are read. The bytes are read straight
// from the offset the attribute pass found (into buf when it is large
// enough; the copy is then marked pooled), so the file is not parsed
// again; a file whose size changed since is refused. Without a known
// offset the file is parsed again.
func (fi *fileInfo) loadPixels(buf []byte, lo, hi int) (*fileInfo, error) {
	if lo < 0 || hi >= len(fi.Frames) || lo > hi {
		return nil, fmt.Errorf("frames %d to %d asked of a file of %d frames", lo+1, hi+1, len(fi.Frames))
	}
	frameBytes := fi.Rows * fi.Cols * fi.BitsAllocated / 8
	need := len(fi.Frames) * frameBytes
	if fi.PixelPos <= 0 || fi.PixelLen < need {
		px, err := readFile(fi.Path, true)
		if err == nil && (px.Rows != fi.Rows || px.Cols != fi.Cols || len(px.Frames) != len(fi.Frames)) {
			err = fmt.Errorf("the file changed while it was being read")
		}
		return px, err
	}
	f, err := openCaseFile(fi.Path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	size, mod, _, err := f.stat()
	if err != nil {
		return nil, err
	}
	if size != fi.Size {
		return nil, fmt.Errorf("the file changed while it was being read (size %d, was %d)", size, fi.Size)
	}
	if !fi.ModTime.IsZero() && !mod.Equal(fi.ModTime) {
		return nil, fmt.Errorf("the file changed while it was being read (modified %s, was %s)",
			mod.Format("15:04:05.000"), fi.ModTime.Format("15:04:05.000"))
	}
	span := (hi - lo + 1) * frameBytes
	if cap(buf) < span {
		buf = make([]byte, span)
	}
	buf = buf[:span]
	if _, err := f.ReadAt(buf, int64(fi.PixelPos)+int64(lo)*int64(frameBytes)); err != nil {
		return nil, fmt.Errorf("reading pixel data: %w", err)
	}
	px := *fi
	px.Pixels, px.pooled, px.firstFrame = buf, true, lo
	return &px, nil
}
