// Package follow analyses a treatment session while it runs: it watches a
// folder that a scanner or a DICOM receiver fills, tells when a sonication
// is complete, adds it to a prepared review.Session and analyses the
// session so far.
//
// # When a file is read
//
// Files are noticed by file-system events (fsnotify) and by a walk of the
// folder at a polling interval, which also serves folders where events are
// unreliable (network shares). A file is read only once its size and
// modification time have not changed for Options.Settle, and it is used
// only when the attributes read describe the file as it still is (a file
// that grew meanwhile is read again later). Files with temporary names
// (hidden, or ending in .tmp, .part, .partial, .temp, .crdownload, .swp or
// ~) are left alone until renamed. A file that stays unreadable for
// Options.Unreadable is named once, with the reason; it is read again if
// it changes.
//
// # When a sonication is complete
//
// An image series is complete when every temporal position it declares
// (NumberOfTemporalPositions, 0020,0105) holds a frame at every slice
// position the series has shown (phase and magnitude counted apart); a
// series that declares none is complete after Options.Quiet without a new
// frame. A series still missing frames after three quiet times is
// analysed without them (the missing frames are named and their voxels
// count as not monitored), as it is when following ends. Complete series are analysed
// together, except while a series still arriving that declares as many
// time points started within 2 s of one of them (the magnitude of a phase
// series, or its phase).
//
// # Incremental analysis
//
// The first complete sonications and the structure set are loaded and
// prepared (review.Prepare); each later sonication is read from its own
// files only and added with review.Session.AddSonication, which computes
// its thermometry and dose alone; then the session is analysed again.
// Sonications are numbered in order of arrival, which is their delivery
// order when they arrive in order (the offline reading numbers them by
// their first frame time; a sonication arriving after a later one is
// named).
package follow

import (
	"context"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"time"

	"github.com/fsnotify/fsnotify"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/review"
)

// Options tune Run. Zero durations take the defaults given.
type Options struct {
	// Settings of every analysis. Excluded sonications not yet arrived
	// are left out of the exclusion until they arrive.
	Settings review.Settings
	// Study is the StudyInstanceUID to follow; empty: the study of the
	// first file read (files of other studies are named and not used).
	Study string
	// Structures, when not nil, is applied to the first case loaded
	// (contour file, choice of the target) before it is prepared; without
	// it the analysis waits for a structure set to arrive.
	Structures func(*dosemap.Case) error
	// Quiet is how long a series that declares no temporal positions must
	// go without a new frame to count as complete (default 10 s).
	Quiet time.Duration
	// Settle is how long a file must stay unchanged before it is read
	// (default 200 ms).
	Settle time.Duration
	// Unreadable is how long a file must stay unchanged and unreadable
	// before it is named (default 10 s).
	Unreadable time.Duration
	// Poll is the interval of the walks of the folder (default 2 s; 1 s
	// with PollOnly).
	Poll time.Duration
	// PollOnly leaves out file-system events: for folders where they are
	// unreliable.
	PollOnly bool
	// UntilIdle, when positive, ends Run after that long without a new or
	// changed file (once what has arrived is analysed).
	UntilIdle time.Duration
	// Fetch, when not nil, brings the folder up to date from elsewhere
	// (new instances of an archive study), writing each file under a
	// temporary name and renaming it; Run calls it at once and then
	// FetchEvery after each call ends (default 2 s). An error is named
	// when three calls in a row fail (a study that changes during a
	// retrieval fails one call, and the next completes it).
	Fetch      func(ctx context.Context) error
	FetchEvery time.Duration
}

func (o *Options) defaults() {
	if o.Quiet <= 0 {
		o.Quiet = 10 * time.Second
	}
	if o.Settle <= 0 {
		o.Settle = 200 * time.Millisecond
	}
	if o.Unreadable <= 0 {
		o.Unreadable = 10 * time.Second
	}
	if o.FetchEvery <= 0 {
		o.FetchEvery = 2 * time.Second
	}
	if o.Poll <= 0 {
		o.Poll = 2 * time.Second
		if o.PollOnly {
			o.Poll = time.Second
		}
	}
}

// Update is one analysis of the session so far.
type Update struct {
	At          time.Time // when the analysis ended
	Sonications []int     // numbers of the sonications analysed, delivery order
	// New holds the numbers of the sonications this update added; empty
	// when only Case changed (an anatomy series completed after the first
	// analysis), Result being the last analysis again.
	New []int
	// LastFile is when the last file of the newest sonication was last
	// seen changing (written, created or renamed into place).
	LastFile time.Time
	Result   *review.Result
	// Case is the case followed so far: anatomy and structures as first
	// loaded, the sonications analysed (a copy: later updates do not
	// change it).
	Case *dosemap.Case
	// Session is the prepared session, which later updates extend; it is
	// safe for concurrent use (a viewer may probe it).
	Session *review.Session
}

// Latency is the time from the last file of the newest sonication to the
// end of the analysis.
func (u Update) Latency() time.Duration { return u.At.Sub(u.LastFile) }

// fileState is what is known of one file of the folder.
type fileState struct {
	size    int64
	mod     time.Time
	changed time.Time // last seen changing
	pending bool      // to be read once settled
	hdr     *dicomio.Header
	err     error // why it could not be used
	named   bool  // the error has been reported
}

// seriesState is one image series being received.
type seriesState struct {
	uid      string
	declared int                        // NumberOfTemporalPositions; 0 none
	files    map[string]string          // SOPInstanceUID -> path
	frames   map[frameKey]bool          // time point and slice of each frame present
	slices   map[[3]int]bool            // slice positions seen
	comps    map[string]bool            // image components seen (phase, magnitude...)
	lastNew  time.Time                  // last new frame
	first    float64                    // first frame time (when hasTime)
	hasTime  bool                       //
	consumed bool                       // loaded into the session
	hdrs     map[string]*dicomio.Header // path -> header
}

type frameKey struct {
	t    int
	pos  [3]int
	comp string // phase and magnitude frames of one series count apart
}

// follower is the state of one Run.
type follower struct {
	dir       string
	opt       Options
	notice    func(string)
	update    func(Update) error
	files     map[string]*fileState
	series    map[string]*seriesState
	structs   map[string]bool // paths of structure sets
	study     string
	otherSt   map[string]bool // other studies named
	ses       *review.Session
	c         *dosemap.Case  // the case followed so far
	last      *review.Result // the last analysis
	nums      []int
	lastTry   int // complete series and structure sets at the last failed first preparation
	activity  time.Time
	lastStart float64
	lateRT    bool // a structure set arrived after the preparation (named)
	ending    bool // following ends: no more frames will come
	waitNamed bool // the wait for a structure set has been named
}

// Run follows the session in dir until ctx ends (Ctrl-C: a clean end, nil
// error) or, with Options.UntilIdle, until the folder has been idle that
// long. update is called after each analysis (an error from it ends Run);
// notice receives messages for the user (files not used, waiting for a
// structure set...). Neither may be nil.
func Run(ctx context.Context, dir string, opt Options, update func(Update) error, notice func(string)) error {
	opt.defaults()
	st, err := os.Stat(dir)
	if err != nil {
		return fmt.Errorf("case folder %s: %w", dir, err)
	}
	if !st.IsDir() {
		return fmt.Errorf("case folder %s: not a folder", dir)
	}
	f := &follower{dir: dir, opt: opt, notice: notice, update: update, files: map[string]*fileState{},
		series: map[string]*seriesState{}, structs: map[string]bool{}, study: opt.Study, otherSt: map[string]bool{},
		lastTry: -1, activity: time.Now()}
	var events chan fsnotify.Event
	var errs chan error
	var w *fsnotify.Watcher
	if !opt.PollOnly {
		w, err = fsnotify.NewWatcher()
		if err != nil {
			notice(fmt.Sprintf("file-system events unavailable (%v); looking for new files every %s", err, opt.Poll))
		} else {
			defer w.Close()
			events, errs = w.Events, w.Errors
		}
	}
	f.walk(w)
	var fetchErrs chan error
	if opt.Fetch != nil {
		fetchErrs = make(chan error, 1)
		fctx, stopFetch := context.WithCancel(ctx)
		fetchDone := make(chan struct{})
		defer func() { stopFetch(); <-fetchDone }()
		go func() {
			defer close(fetchDone)
			for {
				err := opt.Fetch(fctx)
				if fctx.Err() != nil {
					return
				}
				select {
				case fetchErrs <- err:
				case <-fctx.Done():
					return
				}
				select {
				case <-time.After(opt.FetchEvery):
				case <-fctx.Done():
					return
				}
			}
		}()
	}
	failed := 0
	tick := time.NewTicker(min(opt.Settle/2, 50*time.Millisecond))
	defer tick.Stop()
	poll := time.NewTicker(opt.Poll)
	defer poll.Stop()
	eventErr := false
	for {
		select {
		case <-ctx.Done():
			return nil
		case ev, ok := <-events:
			if !ok {
				events = nil
				continue
			}
			if ev.Has(fsnotify.Create) {
				if fi, err := os.Stat(ev.Name); err == nil && fi.IsDir() {
					f.walkFrom(w, ev.Name) // a new sub-folder: watch it, take what is in it already
					continue
				}
			}
			f.touch(ev.Name, time.Now())
			continue // files are read at the next tick: a burst of events costs one pass
		case err, ok := <-errs:
			if !ok {
				errs = nil
				continue
			}
			if !eventErr {
				eventErr = true
				notice(fmt.Sprintf("file-system events: %v; the walks every %s find what they miss", err, opt.Poll))
			}
			continue
		case err := <-fetchErrs:
			if err == nil {
				failed = 0
			} else if failed++; failed == 3 {
				notice(fmt.Sprintf("fetching new files: %v (trying again every %s)", err, opt.FetchEvery))
			}
			f.walk(w) // what the fetch wrote, should an event be missed
			continue
		case <-poll.C:
			f.walk(w)
		case <-tick.C:
		}
		if err := f.process(ctx); err != nil {
			if ctx.Err() != nil {
				return nil
			}
			return err
		}
		if opt.UntilIdle > 0 && time.Since(f.activity) >= opt.UntilIdle && !f.busy() {
			// Idle: what has arrived is all there is; series without
			// declared time points count as complete.
			f.ending = true
			if err := f.analyse(ctx, time.Now()); err != nil && ctx.Err() == nil {
				return err
			}
			f.finalNotices()
			return nil
		}
	}
}

// tempName reports whether a file name looks like one still being written
// under a temporary name.
func tempName(name string) bool {
	if strings.HasPrefix(name, ".") || strings.HasSuffix(name, "~") {
		return true
	}
	switch strings.ToLower(filepath.Ext(name)) {
	case ".tmp", ".part", ".partial", ".temp", ".crdownload", ".swp":
		return true
	}
	return false
}

// walk notices every file of the folder (and forgets the files gone).
func (f *follower) walk(w *fsnotify.Watcher) {
	seen := f.walkFrom(w, f.dir)
	for p := range f.files {
		if !seen[p] {
			f.touch(p, time.Now())
		}
	}
}

// walkFrom notices every file under root, watching its folders with w
// (when not nil), and returns the paths seen.
func (f *follower) walkFrom(w *fsnotify.Watcher, root string) map[string]bool {
	seen := map[string]bool{}
	now := time.Now()
	filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return nil // an unreadable sub-folder: the next walk tries again
		}
		if p != root && strings.HasPrefix(d.Name(), ".") {
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			if w != nil {
				w.Add(p) // adding twice is harmless
			}
			return nil
		}
		seen[p] = true
		f.touch(p, now)
		return nil
	})
	return seen
}

// touch looks at path again after an event or during a walk.
func (f *follower) touch(p string, now time.Time) {
	if tempName(filepath.Base(p)) {
		return
	}
	st, err := os.Stat(p)
	fs := f.files[p]
	if err != nil || !st.Mode().IsRegular() {
		if fs != nil {
			f.forget(p, fs)
			f.activity = now
		}
		return
	}
	if fs == nil {
		fs = &fileState{size: -1}
		f.files[p] = fs
	}
	if st.Size() != fs.size || !st.ModTime().Equal(fs.mod) {
		fs.size, fs.mod, fs.changed, fs.pending = st.Size(), st.ModTime(), now, true
		f.activity = now
	}
}

// forget drops a file that is gone (renamed or removed).
func (f *follower) forget(p string, fs *fileState) {
	delete(f.files, p)
	delete(f.structs, p)
	if h := fs.hdr; h != nil {
		if s := f.series[h.Series]; s != nil && s.files[h.Instance] == p {
			delete(s.files, h.Instance)
			delete(s.hdrs, p)
		}
	}
}

// busy reports whether a file is waiting to be read.
func (f *follower) busy() bool {
	for _, fs := range f.files {
		if fs.pending {
			return true
		}
	}
	return false
}

func (f *follower) rel(p string) string {
	if r, err := filepath.Rel(f.dir, p); err == nil {
		return r
	}
	return p
}

// process reads the settled files and analyses what is complete.
func (f *follower) process(ctx context.Context) error {
	now := time.Now()
	var ready []string
	for p, fs := range f.files {
		if fs.pending && now.Sub(fs.changed) >= f.opt.Settle {
			ready = append(ready, p)
		}
		if !fs.pending && fs.err != nil && !fs.named && now.Sub(fs.changed) >= f.opt.Unreadable {
			fs.named = true
			f.notice(fmt.Sprintf("%s: not used: %v", f.rel(p), fs.err))
		}
	}
	sort.Strings(ready)
	for _, p := range ready {
		f.read(p, f.files[p], now)
	}
	return f.analyse(ctx, now)
}

// read reads the attributes of a settled file.
func (f *follower) read(p string, fs *fileState, now time.Time) {
	st, err := os.Stat(p)
	if err != nil {
		f.forget(p, fs)
		return
	}
	if st.Size() != fs.size || !st.ModTime().Equal(fs.mod) {
		fs.size, fs.mod, fs.changed = st.Size(), st.ModTime(), now // still changing
		return
	}
	h, err := dicomio.ReadHeader(p)
	if err == nil && (h.Size != fs.size || !h.ModTime.Equal(fs.mod)) {
		fs.changed = now // changed while being read: read again once settled
		return
	}
	fs.pending = false
	if err != nil {
		fs.err, fs.named = err, false
		return
	}
	fs.err = nil
	if old := fs.hdr; old != nil {
		if s := f.series[old.Series]; s != nil && s.consumed {
			f.notice(fmt.Sprintf("%s changed after its sonication was analysed; the change is not used (follow the folder again to use it)", f.rel(p)))
			fs.hdr = h
			return
		}
		f.forget(p, fs)
		f.files[p] = fs
	}
	fs.hdr = h
	if f.study == "" {
		f.study = h.Study
	}
	if h.Study != f.study {
		fs.hdr = nil
		if !f.otherSt[h.Study] {
			f.otherSt[h.Study] = true
			f.notice(fmt.Sprintf("%s belongs to another study (%s) than the one followed (%s); files of that study are not used", f.rel(p), h.Study, f.study))
		}
		return
	}
	if h.StructureSet {
		f.structs[p] = true
		if f.ses != nil && !f.lateRT {
			f.lateRT = true
			f.notice(fmt.Sprintf("structure set %s arrived after the analysis began; it is not used (follow the folder again to use it)", f.rel(p)))
		}
		return
	}
	if !h.Image {
		return
	}
	s := f.series[h.Series]
	if s == nil {
		s = &seriesState{uid: h.Series, files: map[string]string{}, frames: map[frameKey]bool{}, slices: map[[3]int]bool{}, comps: map[string]bool{}, hdrs: map[string]*dicomio.Header{}}
		f.series[h.Series] = s
	}
	if s.consumed {
		f.notice(fmt.Sprintf("%s adds to series %s after its sonication was analysed; it is not used (follow the folder again to use it)", f.rel(p), h.Series))
		return
	}
	if h.TemporalPositions > s.declared {
		s.declared = h.TemporalPositions
	}
	s.files[h.Instance] = p
	s.hdrs[p] = h
	for _, fr := range h.Frames {
		k := frameKey{fr.TemporalPos, fr.Position, fr.Component}
		if !s.frames[k] {
			s.frames[k] = true
			s.lastNew = now
		}
		s.slices[fr.Position] = true
		s.comps[fr.Component] = true
	}
	if h.HasTime && (!s.hasTime || h.FirstTime < s.first) {
		s.first, s.hasTime = h.FirstTime, true
	}
}

// complete reports whether series s holds all its frames.
func (f *follower) complete(s *seriesState, now time.Time) bool {
	if len(s.frames) == 0 {
		return false
	}
	if s.declared <= 0 {
		return f.ending || now.Sub(s.lastNew) >= f.opt.Quiet
	}
	whole := len(s.frames) >= s.declared*len(s.slices)*len(s.comps) // every (time point, slice, component) present
	for k := range s.frames {
		if k.t < 1 || k.t > s.declared {
			whole = false // time points outside the declared range
		}
	}
	// A frame that never comes must not hold the sonication back for
	// ever: after three quiet times it is analysed without it (the
	// reading names the missing frames, marked not monitored).
	return whole || f.ending || now.Sub(s.lastNew) >= 3*f.opt.Quiet
}

// analyse loads the complete series not yet analysed and analyses the
// session when they hold new sonications.
func (f *follower) analyse(ctx context.Context, now time.Time) error {
	var ready, waiting []*seriesState
	for _, s := range f.series {
		if s.consumed {
			continue
		}
		if f.complete(s, now) {
			ready = append(ready, s)
		} else {
			waiting = append(waiting, s)
		}
	}
	if len(ready) == 0 {
		return nil
	}
	// A series still arriving that started with a complete one is likely
	// its other half (magnitude or phase): wait for it.
	for _, w := range waiting {
		if f.ending {
			break
		}
		for _, r := range ready {
			if w.declared == r.declared && w.hasTime && r.hasTime && w.first-r.first < 2 && r.first-w.first < 2 {
				return nil
			}
		}
	}
	sort.Slice(ready, func(a, b int) bool { return ready[a].uid < ready[b].uid })
	var paths []string
	for _, s := range ready {
		for _, p := range s.files {
			paths = append(paths, p)
		}
	}
	if f.ses == nil {
		if len(f.structs) == 0 && f.opt.Structures == nil {
			if !f.waitNamed {
				f.waitNamed = true
				f.notice(fmt.Sprintf("%d series complete; waiting for a structure set", len(ready)))
			}
			return nil
		}
		try := len(ready)*1_000_000 + len(f.structs)
		if try == f.lastTry {
			return nil // nothing new since the last attempt
		}
		f.lastTry = try
		for p := range f.structs {
			paths = append(paths, p)
		}
	}
	lopt := dicomio.LoadOptions{Deferred: true, Study: f.study}
	c, inv, err := dicomio.LoadFiles(ctx, f.dir, paths, lopt, nil)
	if err != nil {
		return err
	}
	problems := func() { // named once the files are used
		for _, pr := range inv.Problems {
			// A batch of sonications alone lacks the anatomy and the
			// structure set by design.
			if !strings.HasPrefix(pr, "no anatomy") && !strings.HasPrefix(pr, "no RTSTRUCT") {
				f.notice(pr)
			}
		}
	}
	if f.ses == nil {
		if len(c.Sonications) == 0 {
			return nil // anatomy only so far
		}
		if f.opt.Structures != nil {
			if err := f.opt.Structures(c); err != nil {
				f.notice(fmt.Sprintf("waiting: %v", err))
				return nil
			}
		}
		if c.Target() == nil {
			if !f.waitNamed {
				f.waitNamed = true
				f.notice(fmt.Sprintf("%d sonication(s) complete; waiting for a structure set with a target", len(c.Sonications)))
			}
			return nil
		}
		ses, err := review.Prepare(ctx, c, f.opt.Settings, nil)
		if err != nil {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			f.notice(fmt.Sprintf("cannot analyse yet: %v", err))
			return nil
		}
		f.ses, f.c = ses, c
		problems()
		for _, so := range c.Sonications {
			f.nums = append(f.nums, so.Number)
			f.noteStart(so)
		}
		for _, s := range ready {
			s.consumed = true
		}
		return f.analysis(ctx, ready, f.nums)
	}
	for _, s := range ready {
		s.consumed = true
	}
	problems()
	var added []int
	for _, so := range c.Sonications {
		so.Number = len(f.nums) + 1
		if err := f.ses.AddSonication(ctx, so); err != nil {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			f.notice(fmt.Sprintf("not analysed: %v", err))
			continue
		}
		f.nums = append(f.nums, so.Number)
		f.c.Sonications = append(f.c.Sonications, so)
		added = append(added, so.Number)
		f.noteStart(so)
	}
	if c.Anatomy != nil && f.c.Anatomy == nil && f.last != nil {
		// The anatomy completed after the first analysis (it declares no
		// time points, so it waits for the quiet time): shown from now on.
		f.c.Anatomy = c.Anatomy
		if len(added) == 0 {
			return f.report(f.last, nil, time.Time{})
		}
	}
	if len(added) == 0 {
		return nil
	}
	return f.analysis(ctx, ready, added)
}

// noteStart names a sonication that arrives after one that started later.
func (f *follower) noteStart(so *dosemap.Sonication) {
	if so.Start.IsZero() {
		return
	}
	t := float64(so.Start.UnixNano()) / 1e9
	if f.lastStart != 0 && t < f.lastStart {
		f.notice(fmt.Sprintf("sonication %d (%s) started before sonication %d but arrived after it; it is numbered by arrival", so.Number, so.Label, so.Number-1))
	}
	f.lastStart = max(f.lastStart, t)
}

// analysis analyses the session and reports the update.
func (f *follower) analysis(ctx context.Context, ready []*seriesState, added []int) error {
	set := f.opt.Settings
	set.Excluded = nil
	for _, e := range f.opt.Settings.Excluded {
		if slices.Contains(f.nums, e) {
			set.Excluded = append(set.Excluded, e)
		}
	}
	if len(set.Excluded) == len(f.nums) {
		f.notice(fmt.Sprintf("sonication(s) %v arrived; every sonication so far is excluded, nothing to analyse yet", added))
		return nil
	}
	r, err := f.ses.Analyze(ctx, set, nil)
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return fmt.Errorf("analysing %s: %w", f.dir, err)
	}
	var last time.Time
	for _, s := range ready {
		for p := range s.hdrs {
			if fs := f.files[p]; fs != nil && fs.changed.After(last) {
				last = fs.changed
			}
		}
	}
	f.last = r
	return f.report(r, added, last)
}

// report hands an update to the caller.
func (f *follower) report(r *review.Result, added []int, last time.Time) error {
	c := *f.c
	c.Sonications = slices.Clone(f.c.Sonications)
	now := time.Now()
	if last.IsZero() {
		last = now
	}
	return f.update(Update{At: now, Sonications: slices.Clone(f.nums), New: added, LastFile: last, Result: r,
		Case: &c, Session: f.ses})
}

// finalNotices names, at the end, files still unreadable and series
// never completed.
func (f *follower) finalNotices() {
	for p, fs := range f.files {
		if fs.err != nil && !fs.named {
			fs.named = true
			f.notice(fmt.Sprintf("%s: not used: %v", f.rel(p), fs.err))
		}
	}
	var open []string
	for _, s := range f.series {
		if !s.consumed && len(s.frames) > len(s.slices) { // several time points: thermometry
			open = append(open, fmt.Sprintf("%s (%d of %d frames)", s.uid, len(s.frames), s.declared*len(s.slices)*len(s.comps)))
		}
	}
	sort.Strings(open)
	for _, o := range open {
		f.notice("series " + o + " was incomplete when following ended; it is not analysed")
	}
}
