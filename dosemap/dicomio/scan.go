package dicomio

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"path/filepath"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"

	"dosecover/dosemap"
	"dosecover/dosemap/safefile"
)

// LoadOptions tune Load.
type LoadOptions struct {
	// AnatomySeries selects the anatomy series by SeriesInstanceUID or
	// SeriesNumber; empty: the anatomy series with the most slices.
	AnatomySeries string
	// PhaseScale, when non-zero, is the phase in radians per stored unit,
	// replacing both an RWV mapping in "rad" and the default mapping of the
	// stored range onto [-π, π) (unsigned values are first centred on
	// 2^(BitsStored-1)).
	PhaseScale float64
	// Workers is the number of files read in parallel; 0: GOMAXPROCS.
	Workers int
	// Deferred leaves the phase and magnitude frames of the sonications in
	// their files: Load reads the pixels of the anatomy, the temperature
	// and dose maps only, and each phase sonication gets a Source that
	// decodes its frames into reused buffers when asked. An analysis then
	// holds the frames of one sonication at a time instead of all of
	// them. The files must stay as they are meanwhile: a file whose size
	// changed is refused, its frames NaN and named in the Source's notes.
	Deferred bool
	// Study is the StudyInstanceUID of the study to read when the folder
	// holds several; empty: the folder must hold one study (a folder with
	// several is then not reviewable, its Inventory listing them). Files
	// of other studies are listed as skipped, with the reason.
	Study string
}

// Scan reads the attributes of every file under dir (any depth, any names),
// skipping pixel data, and returns the inventory of the case. progress, when
// not nil, is called from one goroutine with the number of files done and
// the total. The error is non-nil only when dir cannot be read or ctx ends;
// every problem with the files is reported in the Inventory.
func Scan(ctx context.Context, dir string, progress func(done, total int)) (*Inventory, error) {
	cr, err := scan(ctx, dir, LoadOptions{}, progress)
	if err != nil {
		return nil, err
	}
	return cr.inv, nil
}

// ScanOptions is Scan with options (only Workers and AnatomySeries matter:
// the latter decides which anatomy series the inventory marks as used).
func ScanOptions(ctx context.Context, dir string, opt LoadOptions, progress func(done, total int)) (*Inventory, error) {
	cr, err := scan(ctx, dir, opt, progress)
	if err != nil {
		return nil, err
	}
	return cr.inv, nil
}

// Load reads the case under dir: the anatomy volume, the sonications (phase
// and magnitude, temperature or dose frames) and the structures. It reads
// the attributes of every file first (as Scan does), then the pixel data of
// the files used. progress is called for each pass (attributes, then pixels)
// with the files done and the total of that pass. A case that is not
// reviewable is still returned with what could be read; the Inventory says
// why. The error is non-nil only when dir cannot be read or ctx ends.
func Load(ctx context.Context, dir string, opt LoadOptions, progress func(done, total int)) (*dosemap.Case, *Inventory, error) {
	cr, err := scan(ctx, dir, opt, progress)
	if err != nil {
		return nil, nil, err
	}
	c, err := cr.load(ctx, progress)
	if err != nil {
		return nil, nil, err
	}
	return c, cr.inv, nil
}

// series is one series being assembled.
type series struct {
	info  SeriesInfo
	files []*fileInfo
	phase *stack // RolePhase, RolePhaseMagnitude
	mag   *stack // RoleMagnitude, RolePhaseMagnitude
	image *stack // anatomy, temperature and dose maps
	// more holds the further phase stacks of a series whose frames lie in
	// several orientations (planes acquired together), moreMag its further
	// magnitude stacks; phase and mag are the first of each.
	more    []*stack
	moreMag []*stack
	paired  bool
	mapping string // "rad", "Cel", "CEM43"
}

// unit is one sonication being assembled.
type unit struct {
	kind      string
	phase     *series
	magSeries *series
	data      *stack // phase, temperature or dose frames
	mag       *stack
	start     float64
	info      SonicationInfo
	// stacks are the further stacks acquired with this one (other planes
	// of the same series or series acquired at the same time).
	stacks []unitStack
}

// unitStack is one further stack of a sonication: phase frames and their
// magnitude (nil when none) from series s.
type unitStack struct {
	data, mag *stack
	s         *series
}

type caseReader struct {
	dir       string
	opt       LoadOptions
	inv       *Inventory
	series    []*series
	anatomy   *series
	units     []*unit
	structs   []*structureSet
	structFis []*fileInfo
	patient   dosemap.Patient
}

func (o LoadOptions) workers() int {
	if o.Workers > 0 {
		return o.Workers
	}
	return runtime.GOMAXPROCS(0)
}

// listFiles returns the regular files under dir (following symbolic links
// to files), sorted by path.
func listFiles(dir string) ([]string, error) {
	out, _, err := walkCase(dir)
	return out, err
}

// walkCase returns the regular files under dir (following symbolic links
// to files), sorted by path, and the sub-folders that could not be read,
// as skipped entries with the reason (their path relative to dir ends in
// a separator).
func walkCase(dir string) ([]string, []SkippedFile, error) {
	if err := safefile.CheckDir("case folder", dir); err != nil {
		return nil, nil, err
	}
	var out []string
	var unreadable []SkippedFile
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			if p == dir {
				return err
			}
			rel, _ := filepath.Rel(dir, p)
			unreadable = append(unreadable, SkippedFile{Path: rel + string(filepath.Separator), Reason: "folder cannot be read (" + safefile.Reason(err) + "); the files in it are not used"})
			return nil
		}
		if d.IsDir() {
			return nil
		}
		if d.Type()&fs.ModeSymlink != 0 {
			if r := LinkReason(p); r != "" {
				rel, _ := filepath.Rel(dir, p)
				unreadable = append(unreadable, SkippedFile{Path: rel, Reason: r})
				return nil
			}
		} else if !d.Type().IsRegular() {
			rel, _ := filepath.Rel(dir, p)
			unreadable = append(unreadable, SkippedFile{Path: rel, Reason: SpecialFileReason(d.Type())})
			return nil
		}
		out = append(out, p)
		return nil
	})
	if err != nil {
		return nil, nil, &safefile.PathError{What: "reading case folder", Path: dir, Err: err}
	}
	sort.Strings(out)
	return out, unreadable, nil
}

// readAll reads paths with n workers; fn is called once per path (from the
// worker goroutines) and its results are kept by index. Without progress
// the workers take the next index from a shared counter, with nothing to
// hand over per file; with progress a goroutine reports each file done.
func readAll(ctx context.Context, paths []string, workers int, progress func(done, total int), fn func(i int)) error {
	if workers < 1 {
		workers = 1
	}
	if progress == nil {
		var next atomic.Int64
		var wg sync.WaitGroup
		stop := ctx.Done()
		for w := 0; w < workers; w++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for {
					select {
					case <-stop:
						return
					default:
					}
					i := int(next.Add(1)) - 1
					if i >= len(paths) {
						return
					}
					fn(i)
				}
			}()
		}
		wg.Wait()
		return ctx.Err()
	}
	jobs := make(chan int)
	done := make(chan struct{}, 64)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range jobs {
				fn(i)
				done <- struct{}{}
			}
		}()
	}
	finished := make(chan struct{})
	go func() {
		n := 0
		for range done {
			n++
			progress(n, len(paths))
		}
		close(finished)
	}()
	var err error
feed:
	for i := range paths {
		select {
		case <-ctx.Done():
			err = ctx.Err()
			break feed
		case jobs <- i:
		}
	}
	close(jobs)
	wg.Wait()
	close(done)
	<-finished
	return err
}

func scan(ctx context.Context, dir string, opt LoadOptions, progress func(done, total int)) (*caseReader, error) {
	paths, unreadable, err := walkCase(dir)
	if err != nil {
		return nil, err
	}
	return scanPaths(ctx, dir, paths, unreadable, opt, progress)
}

// scanPaths reads the attributes of the files paths under dir.
func scanPaths(ctx context.Context, dir string, paths []string, unreadable []SkippedFile, opt LoadOptions, progress func(done, total int)) (*caseReader, error) {
	infos := make([]*fileInfo, len(paths))
	errs := make([]error, len(paths))
	err := readAll(ctx, paths, opt.workers(), progress, func(i int) {
		infos[i], errs[i] = readFile(paths[i], false)
	})
	if err != nil {
		return nil, err
	}
	cr := &caseReader{dir: dir, opt: opt, inv: &Inventory{Dir: dir, Files: len(paths)}}
	cr.inv.Series = []SeriesInfo{}
	cr.inv.Sonications = []SonicationInfo{}
	cr.inv.Structures = []StructureInfo{}
	cr.inv.Skipped = append([]SkippedFile{}, unreadable...)
	cr.inv.Problems = []string{}
	if !cr.chooseStudy(infos, errs) {
		for i, e := range errs {
			if e != nil {
				cr.inv.Skipped = append(cr.inv.Skipped, SkippedFile{Path: cr.rel(paths[i]), Reason: skipReason(e)})
			}
		}
		return cr, nil
	}
	cr.assemble(paths, infos, errs)
	return cr, nil
}

func (cr *caseReader) rel(p string) string {
	if r, err := filepath.Rel(cr.dir, p); err == nil {
		return r
	}
	return p
}

// assemble groups the files into series, classifies them, builds the
// sonications and runs the consistency checks.
func (cr *caseReader) assemble(paths []string, infos []*fileInfo, errs []error) {
	inv := cr.inv
	byUID := map[string]*series{}
	for i, fi := range infos {
		if errs[i] != nil {
			inv.Skipped = append(inv.Skipped, SkippedFile{Path: cr.rel(paths[i]), Reason: skipReason(errs[i])})
			continue
		}
		if fi.Structures != nil {
			cr.structs = append(cr.structs, fi.Structures)
			cr.structFis = append(cr.structFis, fi)
		}
		if name, ok := imageStorage[fi.SOPClass]; ok && !fi.IsImage {
			inv.Skipped = append(inv.Skipped, SkippedFile{Path: cr.rel(fi.Path), Reason: "no pixel data although its SOP class is " + name + ": the file is probably truncated"})
			continue
		}
		if fi.SeriesUID == "" && fi.SOPClass == "1.2.840.10008.1.3.10" {
			inv.Skipped = append(inv.Skipped, SkippedFile{Path: cr.rel(fi.Path), Reason: "DICOM directory (DICOMDIR): an index of files, not used (the folder is searched instead)"})
			continue
		}
		if fi.SeriesUID == "" && !fi.IsImage {
			inv.Skipped = append(inv.Skipped, SkippedFile{Path: cr.rel(fi.Path), Reason: "no image data, no structure set and no SeriesInstanceUID (0020,000E): not used"})
			continue
		}
		if fi.SeriesUID == "" {
			inv.Skipped = append(inv.Skipped, SkippedFile{Path: cr.rel(fi.Path), Reason: "missing tag SeriesInstanceUID (0020,000E)"})
			continue
		}
		s := byUID[fi.SeriesUID]
		if s == nil {
			s = &series{info: SeriesInfo{UID: fi.SeriesUID, Number: fi.SeriesNumber, Description: fi.SeriesDescription, Modality: fi.Modality, FrameOfRef: fi.FrameOfRef}}
			byUID[fi.SeriesUID] = s
			cr.series = append(cr.series, s)
		}
		s.files = append(s.files, fi)
		s.info.Paths = append(s.info.Paths, fi.Path)
		if cr.patient == (dosemap.Patient{}) {
			cr.patient = fi.Patient
		}
	}
	sort.SliceStable(cr.series, func(a, b int) bool {
		if cr.series[a].info.Number != cr.series[b].info.Number {
			return cr.series[a].info.Number < cr.series[b].info.Number
		}
		return cr.series[a].info.UID < cr.series[b].info.UID
	})
	for _, s := range cr.series {
		cr.oneFrameOfReference(s)
		cr.classify(s)
	}
	cr.chooseAnatomy()
	cr.buildSonications()
	cr.structures()
	cr.checkFrames()
	for _, s := range cr.series {
		inv.Series = append(inv.Series, s.info)
	}
	if len(cr.units) == 0 {
		inv.NotReviewable = "no thermometry (phase), temperature-map or dose-map series found"
		switch s := inv.Skipped; {
		case inv.Files == 0:
			inv.NotReviewable = "the folder holds no files"
		case len(s) == inv.Files:
			inv.NotReviewable = fmt.Sprintf("none of its %d files could be used (%s: %s%s)", inv.Files, s[0].Path, s[0].Reason, andMore(len(s)-1))
		case len(s) > 0:
			inv.NotReviewable += fmt.Sprintf("; %d files skipped (%s: %s%s)", len(s), s[0].Path, s[0].Reason, andMore(len(s)-1))
		}
	} else {
		inv.Reviewable = true
	}
}

// classify decides the role of a series from its attributes.
func (cr *caseReader) classify(s *series) {
	inv := cr.inv
	var frames, pf, mf, other []frameRef
	for _, fi := range s.files {
		if fi.B0 > 0 && s.info.B0 == 0 {
			s.info.B0 = fi.B0
		}
		if fi.TE > 0 && s.info.TE == 0 {
			s.info.TE = fi.TE
		}
		if fi.B0 > 0 && math.Abs(fi.B0-s.info.B0) > 1e-6 {
			inv.problem("series %s: MagneticFieldStrength differs between files (%g T and %g T); %g T is used", s.name(), s.info.B0, fi.B0, s.info.B0)
		}
		for n := range fi.Frames {
			r := frameRef{fi, n}
			frames = append(frames, r)
			switch fi.Frames[n].Component {
			case "P":
				pf = append(pf, r)
			case "M":
				mf = append(mf, r)
			default:
				other = append(other, r)
			}
		}
	}
	s.info.Files = len(s.files)
	s.info.Frames = len(frames)
	if len(s.files) > 0 && s.files[0].Structures != nil {
		s.info.Role = RoleStructureSet
		return
	}
	if len(frames) == 0 {
		s.info.Role = RoleOther
		s.info.Note = "no image data"
		return
	}
	for _, r := range frames {
		for _, m := range r.meta().RWV {
			switch {
			case strings.EqualFold(m.Label, "CEM43"):
				s.mapping = "CEM43"
			case m.Units == "Cel" && s.mapping != "CEM43":
				s.mapping = "Cel"
			case m.Units == "rad" && s.mapping == "":
				s.mapping = "rad"
			}
		}
	}
	build := func(fr []frameRef) *stack {
		st, err := buildStack(fr)
		if err != nil {
			s.info.Note = err.Error()
			inv.problem("series %s: %v; the series is not used", s.name(), err)
			return nil
		}
		for _, p := range st.Problems {
			inv.problem("series %s: %s", s.name(), p)
		}
		return st
	}
	// split splits the phase or magnitude frames into stacks, naming the
	// series in any problem with their StackIDs.
	split := func(fr []frameRef, kind string) ([][]frameRef, []string) {
		groups, ids, problems := splitStacks(fr)
		for _, p := range problems {
			inv.problem("series %s (%s frames): %s", s.name(), kind, p)
		}
		return groups, ids
	}
	setInfo := func(st *stack) {
		s.info.Geometry = st.Geometry
		s.info.TimePoints = len(st.Grid)
		if st.HasTimes && len(st.Times) > 0 {
			s.info.Start = toTime(st.Times[0], st.Dated)
			s.info.StartClock = clockString(st.Times[0])
			s.info.Duration = st.Times[len(st.Times)-1] - st.Times[0]
		}
	}
	switch {
	case s.mapping == "CEM43" || s.mapping == "Cel":
		if s.mapping == "CEM43" {
			s.info.Role = RoleDoseMap
			s.info.Note = "Real World Value Mapping labelled CEM43 (minutes)"
		} else {
			s.info.Role = RoleTemperatureMap
			s.info.Note = "Real World Value Mapping in Cel (absolute °C)"
		}
		if s.image = build(frames); s.image == nil {
			s.info.Role = RoleOther
			return
		}
		setInfo(s.image)
		return
	case s.info.Modality != "MR" && s.info.Modality != "CT":
		s.info.Role = RoleOther
		s.info.Note = fmt.Sprintf("modality %s is not used", orNone(s.info.Modality))
		return
	case s.info.Modality == "MR" && len(pf) > 0:
		if len(other) > 0 {
			inv.problem("series %s: %d frames that are neither phase nor magnitude are ignored", s.name(), len(other))
		}
		groups, ids := split(pf, "phase")
		if s.phase = build(groups[0]); s.phase == nil {
			s.info.Role = RoleOther
			return
		}
		s.phase.StackID = ids[0]
		for n, g := range groups[1:] {
			if st := build(g); st != nil {
				st.StackID = ids[n+1]
				s.more = append(s.more, st)
			}
		}
		if len(groups) > 1 {
			s.info.Note = fmt.Sprintf("%d stacks in different orientations, read as planes acquired together", len(groups))
			if ids[0] != "" {
				s.info.Note = fmt.Sprintf("%d stacks (StackID %s), read as planes acquired together", len(groups), strings.Join(ids, ", "))
			}
		}
		setInfo(s.phase)
		if len(s.phase.Grid) < 2 {
			s.info.Role = RoleOther
			s.info.Note = "phase images with one time frame per slice: not thermometry"
			s.phase = nil
			return
		}
		s.info.Role = RolePhase
		if len(mf) > 0 {
			var mags []*stack
			groups, ids := split(mf, "magnitude")
			for n, g := range groups {
				if st := build(g); st != nil {
					st.StackID = ids[n]
					mags = append(mags, st)
				}
			}
			// Each phase stack takes the magnitude stack on its grid.
			match := func(ph *stack) *stack {
				for _, m := range mags {
					if m.Geometry.SameGrid(ph.Geometry, posTol) && len(m.Grid) == len(ph.Grid) {
						return m
					}
				}
				return nil
			}
			if s.mag = match(s.phase); s.mag == nil && len(mags) > 0 {
				inv.problem("series %s: magnitude frames (%d time points, %s) do not match the phase frames (%d time points, %s); magnitude not used",
					s.name(), len(mags[0].Grid), mags[0].Geometry, len(s.phase.Grid), s.phase.Geometry)
			} else if s.mag != nil {
				s.info.Role = RolePhaseMagnitude
			}
			for _, ph := range s.more {
				s.moreMag = append(s.moreMag, match(ph))
			}
		}
		return
	case s.info.Modality == "MR" && len(mf) > 0 && len(other) == 0:
		groups, ids := split(mf, "magnitude")
		st := build(groups[0])
		if st == nil {
			s.info.Role = RoleOther
			return
		}
		st.StackID = ids[0]
		setInfo(st)
		if len(st.Grid) > 1 {
			s.info.Role = RoleMagnitude
			s.mag = st
			for n, g := range groups[1:] {
				if m := build(g); m != nil {
					m.StackID = ids[n+1]
					s.moreMag = append(s.moreMag, m)
				}
			}
			return
		}
		if len(groups) > 1 {
			if st = build(mf); st == nil { // anatomy: one grid or nothing
				s.info.Role = RoleOther
				return
			}
		}
		s.info.Role = RoleAnatomy
		s.image = st
		return
	}
	// MR or CT images without phase: anatomy.
	st := build(frames)
	if st == nil {
		s.info.Role = RoleOther
		return
	}
	setInfo(st)
	s.info.Role = RoleAnatomy
	s.image = st
	if len(st.Grid) > 1 {
		s.info.Note = fmt.Sprintf("%d time points; the first is used as anatomy", len(st.Grid))
	}
}

func orNone(s string) string {
	if s == "" {
		return "(none)"
	}
	return s
}

func (s *series) name() string {
	d := s.info.Description
	if d == "" {
		d = "(no description)"
	}
	return fmt.Sprintf("#%d %q", s.info.Number, d)
}

// chooseAnatomy picks the anatomy series: the one named by
// LoadOptions.AnatomySeries, else the one with the most slices.
func (cr *caseReader) chooseAnatomy() {
	var cands []*series
	for _, s := range cr.series {
		if s.info.Role == RoleAnatomy && s.image != nil {
			cands = append(cands, s)
		}
	}
	if want := cr.opt.AnatomySeries; want != "" {
		for _, s := range cands {
			if s.info.UID == want || strconv.Itoa(s.info.Number) == want {
				cr.anatomy = s
			}
		}
		if cr.anatomy == nil {
			cr.inv.problem("anatomy series %q not found among the anatomy series; the one with the most slices is used", want)
		}
	}
	if cr.anatomy == nil {
		for _, s := range cands {
			if cr.anatomy == nil || s.image.Geometry.Slices > cr.anatomy.image.Geometry.Slices {
				cr.anatomy = s
			}
		}
	}
	if cr.anatomy != nil {
		cr.anatomy.info.Default = true
		if len(cands) > 1 {
			cr.inv.problem("%d anatomy series; %s (%d slices) is used (choose another with its SeriesInstanceUID or number)", len(cands), cr.anatomy.name(), cr.anatomy.image.Geometry.Slices)
		}
	} else {
		cr.inv.problem("no anatomy series (MR or CT images that are not thermometry): dose is shown without anatomy")
	}
}

// buildSonications makes one sonication per thermometry acquisition
// (phase series, with its magnitude in the same series or in a magnitude
// series of the same geometry and frame times), per temperature-map series
// and per dose-map series, ordered by acquisition time.
func (cr *caseReader) buildSonications() {
	inv := cr.inv
	var mags, results []*series
	stackTaken := map[*stack]bool{}
	for _, s := range cr.series {
		switch s.info.Role {
		case RolePhase, RolePhaseMagnitude:
			u := &unit{kind: "phase", phase: s, data: s.phase, mag: s.mag}
			for n, st := range s.more {
				us := unitStack{data: st, s: s}
				if n < len(s.moreMag) {
					us.mag = s.moreMag[n]
				}
				u.stacks = append(u.stacks, us)
			}
			cr.units = append(cr.units, u)
		case RoleMagnitude:
			mags = append(mags, s)
		case RoleTemperatureMap:
			cr.units = append(cr.units, &unit{kind: "temperature", phase: s, data: s.image})
		case RoleDoseMap:
			if isCumulativeResult(s) {
				results = append(results, s)
				continue
			}
			cr.units = append(cr.units, &unit{kind: "dose", phase: s, data: s.image})
		}
	}
	// A cumulative dose map that dosecover stored as a result beside the
	// thermometry it was computed from already sums it: adding it would
	// count that dose twice. It stands alone only when nothing else does.
	for _, s := range results {
		if len(cr.units) > 0 {
			s.info.Role = RoleOther
			s.info.Note = "cumulative dose map of an earlier review (ImageType " + CumulativeDoseImageType + "); not added to the sonications it sums"
			inv.problem("series %s is the cumulative dose of an earlier review of these sonications; it is not used", s.name())
			continue
		}
		cr.units = append(cr.units, &unit{kind: "dose", phase: s, data: s.image})
	}
	// Pair phase-only stacks with the stacks of magnitude series: same
	// grid, same number of time points, every frame within 1 s (when both
	// have times).
	pair := func(ph *stack) (*stack, *series) {
		var best *stack
		var bestS *series
		bestDT := math.Inf(1)
		for _, m := range mags {
			for _, ms := range append([]*stack{m.mag}, m.moreMag...) {
				if ms == nil || !ms.Geometry.SameGrid(ph.Geometry, posTol) || len(ms.Grid) != len(ph.Grid) {
					continue
				}
				dt := 0.0
				if ms.HasTimes && ph.HasTimes {
					dt = math.Abs(ms.Times[0] - ph.Times[0])
					ok := dt <= 1
					for t := range ms.Times {
						if math.Abs(ms.Times[t]-ph.Times[t]) > 1 {
							ok = false
						}
					}
					if !ok {
						continue
					}
				}
				if dt < bestDT && !stackTaken[ms] {
					best, bestS, bestDT = ms, m, dt
				}
			}
		}
		if best != nil {
			stackTaken[best] = true
		}
		return best, bestS
	}
	for _, u := range cr.units {
		if u.kind != "phase" {
			continue
		}
		if u.mag == nil {
			if ms, m := pair(u.data); ms != nil {
				u.mag, u.magSeries = ms, m
				m.paired = true
				m.info.Note = "magnitude of phase series " + u.phase.name()
			}
		}
		for n := range u.stacks {
			if u.stacks[n].mag == nil {
				if ms, m := pair(u.stacks[n].data); ms != nil {
					u.stacks[n].mag = ms
					m.paired = true
					m.info.Note = "magnitude of phase series " + u.phase.name()
					if u.magSeries == nil {
						u.magSeries = m
					}
				}
			}
		}
	}
	for _, m := range mags {
		if !m.paired {
			inv.problem("magnitude series %s has no phase series of the same geometry and frame times; it is not used", m.name())
			m.info.Note = "no matching phase series"
		}
	}
	cr.groupAcquiredTogether()
	starts := make([]clockTime, len(cr.units))
	for n, u := range cr.units {
		if u.data.HasTimes {
			starts[n] = u.data.Grid0Time()
		}
	}
	abs := unwrapMidnight(starts)
	for n, u := range cr.units {
		u.start = abs[n]
		if !u.data.HasTimes {
			u.start = math.Inf(1)
		}
	}
	sort.SliceStable(cr.units, func(a, b int) bool { return cr.units[a].start < cr.units[b].start })
	for n, u := range cr.units {
		kind := u.kind
		if kind == "phase" && u.mag != nil {
			kind = "phase+magnitude"
		}
		si := SonicationInfo{
			Number: n + 1, Kind: kind, Label: u.phase.info.Description,
			Series: []string{u.phase.info.UID}, Frames: len(u.data.Grid), Slices: u.data.Geometry.Slices,
			B0: u.phase.info.B0, TE: u.phase.info.TE,
		}
		if si.Label == "" {
			si.Label = fmt.Sprintf("series %d", u.phase.info.Number)
		}
		si.Stacks = append(si.Stacks, stackInfo(u.data, u.phase))
		for _, us := range u.stacks {
			si.Stacks = append(si.Stacks, stackInfo(us.data, us.s))
			if !slices.Contains(si.Series, us.s.info.UID) {
				si.Series = append(si.Series, us.s.info.UID)
			}
		}
		if len(si.Stacks) == 1 {
			si.Stacks = nil // one stack: the sonication's own figures say it all
		}
		if u.magSeries != nil {
			si.Series = append(si.Series, u.magSeries.info.UID)
			if si.B0 == 0 {
				si.B0 = u.magSeries.info.B0
			}
			if si.TE == 0 {
				si.TE = u.magSeries.info.TE
			}
		}
		if u.data.HasTimes {
			si.Start = toTime(u.data.Times[0], u.data.Dated)
			si.StartClock = clockString(u.data.Times[0])
			si.Duration = u.data.Times[len(u.data.Times)-1] - u.data.Times[0]
		} else if len(u.data.Grid) > 1 {
			inv.problem("sonication %d (series %s): frames carry no acquisition or content times; thermal dose cannot be timed", n+1, u.phase.name())
		}
		if u.kind == "phase" {
			if si.B0 == 0 {
				inv.problem("sonication %d (series %s): MagneticFieldStrength (0018,0087) missing; temperature needs B0 - give it in the thermometry settings", n+1, u.phase.name())
			}
			if si.TE == 0 {
				inv.problem("sonication %d (series %s): EchoTime (0018,0081) missing; temperature needs TE - give it in the thermometry settings", n+1, u.phase.name())
			}
		}
		if u.kind == "dose" && len(u.data.Grid) > 1 {
			inv.problem("sonication %d (dose map %s): %d time points; the last is used", n+1, u.phase.name(), len(u.data.Grid))
		}
		u.info = si
		inv.Sonications = append(inv.Sonications, si)
	}
}

// Grid0Time returns the clock time of the first time point.
func (st *stack) Grid0Time() clockTime {
	for _, r := range st.Grid[0] {
		if r != nil {
			// Times[0] is already unwrapped within the series; rebuild a
			// clock time from it so that series compare on one scale.
			t := st.Times[0]
			if st.Dated {
				return clockTime{Day: int(math.Floor(t / 86400)), Sec: t - 86400*math.Floor(t/86400), OK: true}
			}
			return clockTime{Day: -1, Sec: t, OK: true}
		}
	}
	return clockTime{Day: -1}
}

// structures collects the ROIs of every structure set.
func (cr *caseReader) structures() {
	inv := cr.inv
	if len(cr.structs) > 1 {
		inv.problem("%d structure sets; the ROIs of all are listed and used", len(cr.structs))
	}
	target := false
	for n, ss := range cr.structs {
		for i := range ss.Info {
			ss.Info[i].File = cr.rel(cr.structFis[n].Path)
			inv.Structures = append(inv.Structures, ss.Info[i])
			if ss.Structures[i].Role == dosemap.RoleTarget && len(ss.Structures[i].Contours) > 0 {
				target = true
			}
		}
		for _, p := range ss.Problems {
			inv.problem("structure set %s: %s", cr.rel(cr.structFis[n].Path), p)
		}
	}
	if len(cr.structs) == 0 {
		inv.problem("no RTSTRUCT: no target to measure coverage against")
	} else if !target {
		inv.problem("no target structure (RTROIInterpretedType PTV, CTV or GTV with closed planar contours)")
	}
}

// checkFrames compares the frames of reference of anatomy, thermometry and
// structures: positions in different frames of reference cannot be related.
func (cr *caseReader) checkFrames() {
	inv := cr.inv
	ref, refName := "", ""
	if cr.anatomy != nil && cr.anatomy.info.FrameOfRef != "" {
		ref, refName = cr.anatomy.info.FrameOfRef, "anatomy series "+cr.anatomy.name()
	}
	check := func(uid, name string) {
		if uid == "" {
			inv.problem("%s has no FrameOfReferenceUID; its positions are assumed to match", name)
			return
		}
		if ref == "" {
			ref, refName = uid, name
			return
		}
		if uid != ref {
			inv.problem("frame of reference mismatch: %s uses FrameOfReferenceUID %s but %s uses %s; their positions cannot be related", name, uid, refName, ref)
		}
	}
	for _, u := range cr.units {
		check(u.phase.info.FrameOfRef, fmt.Sprintf("sonication %d (series %s)", u.info.Number, u.phase.name()))
		// Further stacks and magnitude from other series: each series
		// named once.
		seen := map[*series]bool{u.phase: true}
		for _, us := range u.stacks {
			if !seen[us.s] {
				seen[us.s] = true
				check(us.s.info.FrameOfRef, fmt.Sprintf("a stack of sonication %d (series %s)", u.info.Number, us.s.name()))
			}
		}
		if m := u.magSeries; m != nil && !seen[m] {
			seen[m] = true
			check(m.info.FrameOfRef, fmt.Sprintf("the magnitude of sonication %d (series %s)", u.info.Number, m.name()))
		}
	}
	for n, ss := range cr.structs {
		fors := map[string]bool{}
		for _, s := range ss.Structures {
			if s.FrameOfRef != "" {
				fors[s.FrameOfRef] = true
			}
		}
		if len(fors) == 0 {
			fors[ss.FrameOfRef] = true
		}
		keys := make([]string, 0, len(fors))
		for k := range fors {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			check(k, "structure set "+cr.rel(cr.structFis[n].Path))
		}
	}
}

// skipReason is the reason a file that could not be read is skipped.
func skipReason(err error) string {
	var fe *fileError
	if !errors.As(err, &fe) {
		return "unreadable: " + err.Error()
	}
	return err.Error()
}

// andMore returns ", and N more" for n > 0.
func andMore(n int) string {
	if n <= 0 {
		return ""
	}
	return fmt.Sprintf(", and %d more", n)
}

// imageStorage names the image SOP classes (PS3.4 B.5) whose files must
// carry pixel data (PS3.3 C.7.6.3, Type 1 in these IODs; RT Dose is left
// out: its pixel data is conditional).
var imageStorage = map[string]string{
	"1.2.840.10008.5.1.4.1.1.4":   "MR Image Storage",
	"1.2.840.10008.5.1.4.1.1.4.1": "Enhanced MR Image Storage",
	"1.2.840.10008.5.1.4.1.1.2":   "CT Image Storage",
	"1.2.840.10008.5.1.4.1.1.2.1": "Enhanced CT Image Storage",
	"1.2.840.10008.5.1.4.1.1.7":   "Secondary Capture Image Storage",
}

// CumulativeDoseImageType is value 4 of ImageType (0008,0008) in the dose
// maps dosecover writes as results (review/dicomout): the cumulative dose
// of the sonications of a study.
const CumulativeDoseImageType = "CUMULATIVE_DOSE"

// isCumulativeResult reports whether a dose-map series is a cumulative
// result of an earlier review (CumulativeDoseImageType).
func isCumulativeResult(s *series) bool {
	for _, f := range s.files {
		if len(f.ImageType) < 4 || !strings.EqualFold(strings.TrimSpace(f.ImageType[3]), CumulativeDoseImageType) {
			return false
		}
	}
	return len(s.files) > 0
}
