package dicomio

import (
	"context"
	"fmt"
	"math"
	"sync"

	"dosecover/dosemap"
	"dosecover/dosemap/safefile"
)

// frameSource is the dosemap.FrameSource of a phase sonication loaded with
// LoadOptions.Deferred: it keeps where each frame lies and decodes the
// frames on demand into buffers shared by all sources.
type frameSource struct {
	nv, nt int // voxels per frame, time points
	sl     int // voxels per slice
	hasMag bool
	files  []*fileInfo
	plan   [][]slot // per file, the frames it holds
	empty  []slot   // grid positions without a frame (NaN)
	rel    func(string) string
	mu     sync.Mutex
	lent   map[*float32]*frameSet // by the first value of the phase slab
}

// slot is one frame of a file and its place in the sonication.
type slot struct {
	frame int  // frame number in the file
	mag   bool // magnitude (else phase)
	t, k  int  // time point, slice
	a, b  float64
}

// newFrameSource records the frames of the phase stack ph and magnitude
// stack mag (nil when there is none) with their value conversions.
func (cr *caseReader) newFrameSource(ph, mag *stack, phaseConv, magConv func(m *frameMeta, fi *fileInfo) (a, b float64)) *frameSource {
	g := ph.Geometry
	src := &frameSource{nv: g.Len(), nt: len(ph.Grid), sl: g.SliceLen(), hasMag: mag != nil, rel: cr.rel, lent: map[*float32]*frameSet{}}
	index := map[*fileInfo]int{}
	add := func(st *stack, isMag bool, conv func(m *frameMeta, fi *fileInfo) (a, b float64)) {
		for t, row := range st.Grid {
			if t >= src.nt {
				break
			}
			for k, r := range row {
				if r == nil {
					src.empty = append(src.empty, slot{mag: isMag, t: t, k: k})
					continue
				}
				n, ok := index[r.fi]
				if !ok {
					n = len(src.files)
					index[r.fi] = n
					src.files = append(src.files, r.fi)
					src.plan = append(src.plan, nil)
				}
				a, b := conv(r.meta(), r.fi)
				src.plan[n] = append(src.plan[n], slot{frame: r.n, mag: isMag, t: t, k: k, a: a, b: b})
			}
		}
		// Time points the magnitude stack lacks are NaN.
		for t := len(st.Grid); t < src.nt; t++ {
			for k := 0; k < g.Slices; k++ {
				src.empty = append(src.empty, slot{mag: isMag, t: t, k: k})
			}
		}
	}
	add(ph, false, phaseConv)
	if mag != nil {
		add(mag, true, magConv)
	}
	return src
}

// frameSet is one sonication's worth of frames in one allocation.
type frameSet struct {
	slab        []float32
	phase, mag  [][]float32
	nv, nt, len int
}

// frameSets holds released frame sets for reuse, by slab length.
var frameSets sync.Map // int → *sync.Pool

func getFrameSet(nv, nt int, mag bool) *frameSet {
	n := nv * nt
	if mag {
		n *= 2
	}
	p, _ := frameSets.LoadOrStore(n, &sync.Pool{})
	if fs, ok := p.(*sync.Pool).Get().(*frameSet); ok && fs.nv == nv && fs.nt == nt {
		return fs
	}
	fs := &frameSet{slab: make([]float32, n), nv: nv, nt: nt, len: n}
	fs.phase = make([][]float32, nt)
	for t := range fs.phase {
		fs.phase[t] = fs.slab[t*nv : (t+1)*nv : (t+1)*nv]
	}
	if mag {
		fs.mag = make([][]float32, nt)
		for t := range fs.mag {
			o := (nt + t) * nv
			fs.mag[t] = fs.slab[o : o+nv : o+nv]
		}
	}
	return fs
}

// ReadFrames implements dosemap.FrameSource.
func (s *frameSource) ReadFrames(ctx context.Context) (phase, magnitude [][]float32, notes []string, err error) {
	fs := getFrameSet(s.nv, s.nt, s.hasMag)
	nan := float32(math.NaN())
	slice := func(sl slot) []float32 {
		fr := fs.phase[sl.t]
		if sl.mag {
			fr = fs.mag[sl.t]
		}
		return fr[sl.k*s.sl : (sl.k+1)*s.sl]
	}
	for _, e := range s.empty {
		for n, d := 0, slice(e); n < len(d); n++ {
			d[n] = nan
		}
	}
	ts := make([]target, 0, 8)
	var tabs valueTables
	for n, fi := range s.files {
		if err := ctx.Err(); err != nil {
			s.put(fs)
			return nil, nil, nil, err
		}
		ts = ts[:0]
		for _, sl := range s.plan[n] {
			ts = append(ts, target{frame: sl.frame, dst: slice(sl), a: sl.a, b: sl.b})
		}
		if err := decodeFile(fi, ts, &tabs); err != nil {
			notes = append(notes, fmt.Sprintf("%s: pixel data could not be read (%s); its frames are marked not monitored", s.rel(fi.Path), safefile.Reason(err)))
		}
	}
	if len(fs.slab) > 0 {
		s.mu.Lock()
		s.lent[&fs.slab[0]] = fs
		s.mu.Unlock()
	}
	return fs.phase, fs.mag, notes, nil
}

// ReleaseFrames implements dosemap.FrameSource.
func (s *frameSource) ReleaseFrames(phase, _ [][]float32) {
	if len(phase) == 0 || len(phase[0]) == 0 {
		return
	}
	s.mu.Lock()
	fs := s.lent[&phase[0][0]]
	delete(s.lent, &phase[0][0])
	s.mu.Unlock()
	if fs != nil {
		s.put(fs)
	}
}

func (s *frameSource) put(fs *frameSet) {
	p, _ := frameSets.LoadOrStore(fs.len, &sync.Pool{})
	p.(*sync.Pool).Put(fs)
}

var _ dosemap.FrameSource = (*frameSource)(nil)
