package audit

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"hash/fnv"
	"io"
	"os"
	"path"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"sort"
	"strings"
	"sync"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/safefile"
	"dosecover/review"
)

// Column is one settings column of the summary table, the same in every row
// (for example "threshold" = "240").
type Column struct {
	Name, Value string
}

// Config describes one audit run.
type Config struct {
	Inputs []string // folders to search for cases (see Discover)
	OutDir string   // output folder; must not be inside any input folder
	// Workers is the number of cases analysed at once, and so also the
	// largest number of cases held in memory at once. 0 means one per CPU.
	Workers int
	// Resume skips cases whose inputs (by InputHash) already have a
	// finished record in OutDir made with the same settings (by
	// SettingsHash) and the same version of dosecover; failed cases are
	// tried again.
	Resume bool
	// Shard restricts the run to one part of the case list (zero: all).
	Shard Shard
	// Deidentify names cases by a pseudonym made from their input hash,
	// leaves their source paths out of every output and asks the Analyzer
	// to leave out patient identity.
	Deidentify bool
	// Settings is the analysis settings as JSON; it is stored in every
	// record and in OutDir/settings.json, and its SettingsHash decides
	// whether an earlier result may be reused. A run without a shard
	// replaces OutDir/settings.json; a sharded run writes it when absent
	// and is refused (*SettingsConflictError) when it holds other
	// settings, so that shards share an output folder only as parts of
	// one audit.
	Settings json.RawMessage
	// SettingsColumns are added to every row of the summary table.
	SettingsColumns []Column
	// Analyzer analyses one case; required.
	Analyzer Analyzer
	// Progress, when not nil, is called after discovery and after each
	// case, always from one goroutine at a time.
	Progress func(Progress)
}

// UsageError reports a Config the caller got wrong (as opposed to a failure
// while running); a command line turns it into exit code 2.
type UsageError struct{ Msg string }

// Error returns the message.
func (e *UsageError) Error() string { return e.Msg }

// Row is one case of the summary table.
type Row struct {
	Case         string // ID: folder name below OutDir/cases
	Source       string // case Name; empty when de-identified
	Status       Status
	Reason       string // why the case is incomplete or failed
	Metrics      Metrics
	Flags        []string
	InputSHA256  string
	SettingsHash string
	Seconds      float64  // analysis time of the case
	Resumed      bool     // taken from an earlier run
	Dir          string   // the case's output folder (absolute); empty when nothing was written
	Artifacts    []string // files of the case in Dir besides case.json (the report)
}

// Progress reports how far a run has got.
type Progress struct {
	Phase      string // "discovering", "analysing" or "summarising"
	Total      int    // cases in this run (after sharding)
	Done       int    // cases finished, resumed included
	Resumed    int    // cases taken from an earlier run
	Incomplete int
	Failed     int
	Elapsed    time.Duration
	ETA        time.Duration // estimated time left; 0 when unknown
	Last       *Row          // the case just finished; nil outside "analysing"
}

// Summary is the outcome of a run.
type Summary struct {
	Rows        []Row // one per case, sorted by Case
	Analysed    int   // cases with status ok (resumed included)
	Incomplete  int
	Failed      int
	Resumed     int
	Interrupted bool     // the context was cancelled before all cases finished
	Problems    []string // folders that could not be searched
	Header      []string // columns of summary.csv
	Files       []string // summary files written (absolute paths)
}

// ExitCode returns 0 when every case was analysed, 1 when some case is
// incomplete or failed or the run was interrupted.
func (s *Summary) ExitCode() int {
	if s.Interrupted || s.Failed > 0 || s.Incomplete > 0 {
		return 1
	}
	return 0
}

// Run audits the cases below cfg.Inputs and writes the results into
// cfg.OutDir (see the package documentation for the layout). One case that
// cannot be analysed never stops the run: it is listed with its reason.
// When ctx is cancelled, Run lets the cases in progress stop, writes no
// summary and returns the partial Summary with Interrupted set and ctx's
// error; a later run with Resume continues where this one stopped. Errors
// in the Config are returned as *UsageError. An error that keeps the run
// from starting (a usage error, an input folder that is missing or cannot
// be read) comes with a nil Summary; nothing was written then.
func Run(ctx context.Context, cfg Config) (*Summary, error) {
	start := time.Now()
	if cfg.Analyzer == nil {
		return nil, &UsageError{"no analyzer given"}
	}
	if len(cfg.Inputs) == 0 {
		return nil, &UsageError{"no input folder given"}
	}
	if cfg.OutDir == "" {
		return nil, &UsageError{"no output folder given"}
	}
	if cfg.Workers < 0 {
		return nil, &UsageError{fmt.Sprintf("workers %d: want 1 or more (0: one per CPU)", cfg.Workers)}
	}
	workers := cfg.Workers
	if workers == 0 {
		workers = runtime.NumCPU()
	}
	if cfg.Shard.Count > 1 && (cfg.Shard.Index < 1 || cfg.Shard.Index > cfg.Shard.Count) {
		return nil, &UsageError{fmt.Sprintf("shard %d/%d: want 1 <= I <= N", cfg.Shard.Index, cfg.Shard.Count)}
	}
	settings, err := CanonicalSettings(cfg.Settings)
	if err != nil {
		return nil, &UsageError{err.Error()}
	}
	settingsHash, _ := SettingsHash(settings)
	outDir, err := filepath.Abs(cfg.OutDir)
	if err != nil {
		return nil, &UsageError{fmt.Sprintf("output folder %s: %v", cfg.OutDir, err)}
	}
	for _, in := range cfg.Inputs {
		if inside, err := isInside(outDir, in); err != nil {
			return nil, fmt.Errorf("input folder %s: %w", in, err)
		} else if inside {
			return nil, &UsageError{fmt.Sprintf("output folder %s is inside the input folder %s: dosecover never writes into the folders it reads; choose another output folder", cfg.OutDir, in)}
		}
		if holds, err := isInside(in, outDir); err != nil {
			return nil, fmt.Errorf("input folder %s: %w", in, err)
		} else if holds {
			return nil, &UsageError{fmt.Sprintf("output folder %s contains the input folder %s: dosecover never writes into the folders it reads; choose another output folder", cfg.OutDir, in)}
		}
	}

	// Shards of one audit share its output folder only with the same
	// settings: refuse before searching the inputs, write nothing.
	sharded := cfg.Shard.Count > 1
	if sharded {
		if err := sharedSettings(outDir, cfg.OutDir, settings, false); err != nil {
			return nil, err
		}
	}
	// Identified and de-identified records never share a folder.
	if err := checkIdentity(outDir, cfg.OutDir, cfg.Deidentify); err != nil {
		return nil, err
	}

	report := func(p Progress) {
		if cfg.Progress != nil {
			p.Elapsed = time.Since(start)
			cfg.Progress(p)
		}
	}
	report(Progress{Phase: "discovering"})
	all, problems, err := Discover(cfg.Inputs)
	if err != nil {
		// An input folder that is missing or cannot be read is a failure
		// of the run (its message names the folder), not a usage error.
		return nil, err
	}
	cases := cfg.Shard.Select(all)
	if cfg.Deidentify {
		// Names below an input folder may carry identity: a problem
		// keeps its reason only.
		for n, p := range problems {
			problems[n] = "a file or folder of an input was not read: " + p[strings.LastIndex(p, ": ")+2:]
		}
	}
	sum := &Summary{Problems: problems, Header: Header(cfg.SettingsColumns)}
	if len(all) == 0 {
		return sum, fmt.Errorf("no case found below %s: no folder holds DICOM files", strings.Join(cfg.Inputs, ", "))
	}

	if err := os.MkdirAll(filepath.Join(outDir, "cases"), 0o755); err != nil {
		return sum, &safefile.PathError{What: "creating output folder", Path: cfg.OutDir, Err: err}
	}
	// One whole run at a time in an output folder, or the shards of one
	// audit together; leftovers of killed runs are removed only by a run
	// that holds the folder alone, so no live run loses its files.
	release, _, err := lockOutDir(outDir, cfg.OutDir, sharded, func() error {
		if err := removeTemps(outDir, 0); err != nil {
			return err
		}
		if sharded {
			return nil // the other shards' state files are the merge's input
		}
		// A whole run replaces the summary of any earlier split of the
		// audit: its shards' state files go, so no later merge can write
		// their old tables over this run's.
		return removeShardStates(outDir)
	})
	if err != nil {
		var ue *UsageError
		if errors.As(err, &ue) {
			return nil, err
		}
		return sum, err
	}
	defer release()
	var index map[string]*Record
	if cfg.Resume {
		index = resumeIndex(outDir)
	}
	if sharded {
		// Checked again as another shard may have started meanwhile.
		if err := sharedSettings(outDir, cfg.OutDir, settings, true); err != nil {
			return nil, err
		}
	} else if err := writeAtomic(filepath.Join(outDir, SettingsFile), func(w io.Writer) error {
		_, err := w.Write(append(settings, '\n'))
		return err
	}); err != nil {
		return sum, err
	}
	if err := claimIdentity(outDir, cfg.OutDir, cfg.Deidentify, sharded); err != nil {
		return nil, err
	}

	var state *ShardState
	if sharded {
		// Merge tells a finished shard from a running or killed one by this file.
		state = newShardState(&cfg, settings, settingsHash, all)
		if err := state.write(outDir, cfg.Shard); err != nil {
			return sum, err
		}
	}
	w := &worker{cfg: &cfg, outDir: outDir, settings: settings, settingsHash: settingsHash, index: index}
	jobs := make(chan int)
	results := make(chan Row)
	var wg sync.WaitGroup
	for range min(workers, max(len(cases), 1)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range jobs {
				c := cases[i]
				c.Deidentify = cfg.Deidentify
				results <- w.do(ctx, &c)
			}
		}()
	}
	go func() {
		defer close(jobs)
		for i := range cases {
			select {
			case jobs <- i:
			case <-ctx.Done():
				return
			}
		}
	}()
	go func() { wg.Wait(); close(results) }()

	p := Progress{Phase: "analysing", Total: len(cases)}
	report(p)
	analyseStart := time.Now()
	analysed := 0
	for r := range results {
		if r.Status == "" { // interrupted before it finished
			continue
		}
		sum.Rows = append(sum.Rows, r)
		p.Done++
		switch {
		case r.Resumed:
			p.Resumed++
		default:
			analysed++
		}
		switch r.Status {
		case StatusIncomplete:
			p.Incomplete++
		case StatusFailed:
			p.Failed++
		}
		if analysed > 0 {
			per := time.Since(analyseStart) / time.Duration(analysed)
			p.ETA = per * time.Duration(len(cases)-p.Done)
		}
		row := r
		p.Last = &row
		report(p)
	}
	sort.Slice(sum.Rows, func(a, b int) bool { return sum.Rows[a].Case < sum.Rows[b].Case })
	for _, r := range sum.Rows {
		switch r.Status {
		case StatusOK:
			sum.Analysed++
		case StatusIncomplete:
			sum.Incomplete++
		case StatusFailed:
			sum.Failed++
		}
		if r.Resumed {
			sum.Resumed++
		}
	}
	if ctx.Err() != nil && len(sum.Rows) < len(cases) {
		sum.Interrupted = true
		if state != nil {
			state.end(outDir, cfg.Shard, ShardInterrupted, nil) // best effort: a shard left "running" is refused by Merge too
		}
		return sum, ctx.Err()
	}

	report(Progress{Phase: "summarising", Total: len(cases), Done: p.Done, Resumed: p.Resumed, Incomplete: p.Incomplete, Failed: p.Failed})
	base := "summary"
	errName := "errors"
	if sharded {
		suffix := fmt.Sprintf("-%d-of-%d", cfg.Shard.Index, cfg.Shard.Count)
		base += suffix
		errName += suffix
	}
	if sum.Files, err = writeSummaries(outDir, base, errName, sum.Rows, cfg.SettingsColumns); err != nil {
		return sum, err
	}
	if state != nil {
		if err := state.end(outDir, cfg.Shard, ShardFinished, sum.Rows); err != nil {
			return sum, err
		}
	}
	return sum, nil
}

// staleTemp is an age for removeTemps (temporary files older than it are
// leftovers). Run no longer uses an age: it removes leftovers only while
// it holds the output folder's lock alone (lockOutDir).
const staleTemp = 10 * time.Minute

// worker holds what every case of a run shares.
type worker struct {
	cfg          *Config
	outDir       string
	settings     []byte
	settingsHash string
	index        map[string]*Record // resume index; nil without Resume
}

// do handles one case: hash, reuse or analyse, write. A Row with empty
// Status means the case was interrupted and nothing was recorded.
func (w *worker) do(ctx context.Context, c *Case) Row {
	if ctx.Err() != nil {
		return Row{}
	}
	hash, err := InputHash(ctx, c)
	if err != nil {
		if ctx.Err() != nil {
			return Row{}
		}
		if w.cfg.Deidentify {
			// No input hash for a pseudonym: one from the case's name,
			// which does not show the name.
			h := fnv.New64a()
			h.Write([]byte(c.Name))
			c.ID = fmt.Sprintf("case-unread-%012x", h.Sum64()&(1<<48-1))
			c.Name = ""
		}
		return w.finish(c, "", nil, err, 0)
	}
	c.InputSHA256 = hash
	if w.cfg.Deidentify {
		c.ID = "case-" + hash[:12]
		c.Name = ""
	}
	if rec, ok := w.index[resumeKey(hash, w.settingsHash, w.cfg.Deidentify)]; ok {
		r := rowOf(rec)
		r.Resumed = true
		r.Dir = rec.dir
		if !w.cfg.Deidentify {
			r.Source = c.Name
		}
		return r
	}
	t0 := time.Now()
	res, err := safeAnalyze(ctx, w.cfg.Analyzer, c)
	secs := time.Since(t0).Seconds()
	if err != nil && ctx.Err() != nil {
		return Row{}
	}
	return w.finish(c, hash, res, err, secs)
}

// finish writes the case's artifacts and record and returns its Row.
func (w *worker) finish(c *Case, hash string, res *CaseResult, aerr error, secs float64) Row {
	rec := &Record{
		Case: c.ID, Source: c.Name, Status: StatusOK, InputSHA256: hash,
		Files: len(c.Files), Bytes: c.Bytes, SettingsHash: w.settingsHash,
		Settings: w.settings, Deidentified: w.cfg.Deidentify, Version: dosemap.Version,
		AnalysedUTC: time.Now().UTC().Truncate(time.Second), Seconds: secs,
		Metrics: NoMetrics(), Flags: []string{}, Artifacts: []string{}, Caution: Caution,
	}
	if aerr != nil {
		rec.Status, rec.Reason = classify(aerr)
	} else if res == nil {
		rec.Status, rec.Reason = StatusFailed, "the analysis returned no result"
	} else {
		rec.Metrics = res.Metrics
		if res.Flags != nil {
			rec.Flags = res.Flags
		}
		rec.Analysis = res.Analysis
	}
	if w.cfg.Deidentify && rec.Reason != "" {
		rec.Reason = hidePaths(rec.Reason, c)
	}
	dir := filepath.Join(w.outDir, "cases", c.ID)
	recPath := filepath.Join(dir, RecordFile)
	// A record must never describe artifacts of another run: drop the old
	// one before writing new artifacts.
	if err := os.Remove(recPath); err != nil && !os.IsNotExist(err) {
		return failedRow(rec, fmt.Errorf("removing old %s: %w", recPath, err))
	}
	if rec.Status == StatusOK {
		for _, a := range res.Artifacts {
			if a.Name == "" || a.Name == RecordFile || strings.ContainsAny(a.Name, `/\`) || strings.HasPrefix(a.Name, ".") {
				rec.Status, rec.Reason = StatusFailed, fmt.Sprintf("the analysis produced a file with the invalid name %q", a.Name)
				break
			}
			if err := writeAtomic(filepath.Join(dir, a.Name), a.Write); err != nil {
				rec.Status, rec.Reason = StatusFailed, err.Error()
				break
			}
			rec.Artifacts = append(rec.Artifacts, a.Name)
		}
	}
	err := writeAtomic(recPath, func(wr io.Writer) error {
		enc := json.NewEncoder(wr)
		enc.SetIndent("", "  ")
		return enc.Encode(rec)
	})
	if err != nil {
		return failedRow(rec, err)
	}
	r := rowOf(rec)
	r.Dir = dir
	return r
}

func failedRow(rec *Record, err error) Row {
	rec.Status = StatusFailed
	rec.Reason = err.Error()
	return rowOf(rec)
}

func rowOf(rec *Record) Row {
	return Row{
		Case: rec.Case, Source: rec.Source, Status: rec.Status, Reason: rec.Reason,
		Metrics: rec.Metrics, Flags: rec.Flags, InputSHA256: rec.InputSHA256,
		SettingsHash: rec.SettingsHash, Seconds: rec.Seconds, Artifacts: rec.Artifacts,
	}
}

// safeAnalyze calls a, turning a panic into an error so that one bad case
// cannot stop the audit.
func safeAnalyze(ctx context.Context, a Analyzer, c *Case) (res *CaseResult, err error) {
	defer func() {
		if p := recover(); p != nil {
			res = nil
			err = fmt.Errorf("internal error while analysing %s: %v\n%s", c.Dir, p, debug.Stack())
		}
	}()
	return a(ctx, c)
}

// resumeKey identifies a result that may be reused: same inputs, same
// settings, and made with or without de-identification like this run.
func resumeKey(inputHash, settingsHash string, deidentified bool) string {
	return fmt.Sprintf("%s/%s/%v", inputHash, settingsHash, deidentified)
}

// resumeIndex reads the finished records below outDir/cases. A record
// counts when its status is ok or incomplete, it was made by this version
// of dosecover (so one table never mixes versions of the method), the
// analysis it holds, if any, is in this version's result layout
// (review.SchemaVersion: a figure the layout now writes as null must not
// stay 0 in an old record) and all its artifacts exist.
func resumeIndex(outDir string) map[string]*Record {
	index := map[string]*Record{}
	recs, _ := filepath.Glob(filepath.Join(outDir, "cases", "*", RecordFile))
	for _, p := range recs {
		rec, err := ReadRecord(p)
		if err != nil || rec.InputSHA256 == "" || rec.Version != dosemap.Version || (rec.Status != StatusOK && rec.Status != StatusIncomplete) {
			continue
		}
		if rec.analysisSchema != 0 && rec.analysisSchema != review.SchemaVersion {
			continue
		}
		complete := true
		for _, a := range rec.Artifacts {
			if _, err := os.Stat(filepath.Join(rec.dir, a)); err != nil {
				complete = false
			}
		}
		if complete {
			index[resumeKey(rec.InputSHA256, rec.SettingsHash, rec.Deidentified)] = rec
		}
	}
	return index
}

// ReadRecord reads a per-case record (case.json) without its analysis part.
func ReadRecord(path string) (*Record, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("reading %s: %w", path, err)
	}
	var rec Record
	if err := json.Unmarshal(b, &rec); err != nil {
		return nil, fmt.Errorf("reading %s: %w", path, err)
	}
	if rec.Case == "" || rec.Status == "" {
		return nil, fmt.Errorf("reading %s: not a dosecover case record", path)
	}
	if len(rec.Analysis) > 0 {
		var head struct {
			Schema int `json:"schema_version"`
		}
		if json.Unmarshal(rec.Analysis, &head) == nil {
			rec.analysisSchema = head.Schema
		}
	}
	rec.Analysis = nil
	rec.dir = filepath.Dir(path)
	return &rec, nil
}

// isInside reports whether p is dir or lies below it, after resolving
// symbolic links of the parts that exist.
func isInside(p, dir string) (bool, error) {
	d, err := resolve(dir)
	if err != nil {
		return false, err
	}
	q, err := resolve(p)
	if err != nil {
		return false, err
	}
	rel, err := filepath.Rel(d, q)
	if err != nil {
		return false, nil
	}
	return rel == "." || (rel != ".." && !strings.HasPrefix(rel, ".."+string(filepath.Separator))), nil
}

// resolve returns the absolute, symlink-free form of p; for a path that
// does not exist yet it resolves the longest existing parent.
func resolve(p string) (string, error) {
	abs, err := filepath.Abs(p)
	if err != nil {
		return "", err
	}
	rest := ""
	cur := abs
	for {
		r, err := filepath.EvalSymlinks(cur)
		if err == nil {
			return filepath.Join(r, rest), nil
		}
		// Not there (or a part is a file): resolve the parent; the
		// error, if any, shows when the folder is created or read.
		parent := filepath.Dir(cur)
		if parent == cur {
			return abs, nil
		}
		rest = filepath.Join(filepath.Base(cur), rest)
		cur = parent
	}
}

// LoadRows reads the rows of every case record below outDir/cases (for
// example to show a finished audit again), sorted by Case. Records that
// cannot be read are returned as problems, one line each.
func LoadRows(outDir string) (rows []Row, problems []string, err error) {
	recs, err := filepath.Glob(filepath.Join(outDir, "cases", "*", RecordFile))
	if err != nil {
		return nil, nil, err
	}
	if _, err := os.Stat(outDir); err != nil {
		return nil, nil, fmt.Errorf("audit folder %s: %w", outDir, err)
	}
	for _, p := range recs {
		rec, err := ReadRecord(p)
		if err != nil {
			problems = append(problems, err.Error())
			continue
		}
		r := rowOf(rec)
		r.Dir = rec.dir
		rows = append(rows, r)
	}
	sort.Slice(rows, func(a, b int) bool { return rows[a].Case < rows[b].Case })
	return rows, problems, nil
}

// HidePaths returns s with the paths of case c hidden as a de-identified
// run shows them (see hidePaths): for messages of other commands that
// de-identify their output.
func HidePaths(s string, c *Case) string { return hidePaths(s, c) }

// hidePaths returns s with the paths of case c, whose folder and file
// names may carry the patient's name, replaced: the case folder by the
// case ID, each file's path inside it (and, where it stands alone, its
// name of 5 characters or more) by "file N" (N its place in c.Files), each
// subfolder by "a folder of the case".
func hidePaths(s string, c *Case) string {
	s = strings.ReplaceAll(s, c.Dir, c.ID)
	type sub struct{ from, to string }
	var subs []sub
	folders := map[string]bool{}
	for n, f := range c.Files {
		to := fmt.Sprintf("file %d", n+1)
		subs = append(subs, sub{f, to}, sub{filepath.FromSlash(f), to})
		if base := path.Base(f); len(base) >= 5 {
			subs = append(subs, sub{base, to})
		}
		for d := path.Dir(f); d != "." && d != "/"; d = path.Dir(d) {
			folders[d] = true
		}
	}
	for d := range folders {
		subs = append(subs, sub{d, "a folder of the case"}, sub{filepath.FromSlash(d), "a folder of the case"})
	}
	if c.Name != "" {
		subs = append(subs, sub{c.Name, c.ID})
	}
	// Longest first, so that a path goes before its parts.
	sort.SliceStable(subs, func(a, b int) bool { return len(subs[a].from) > len(subs[b].from) })
	for _, x := range subs {
		if x.from != "" {
			s = strings.ReplaceAll(s, x.from, x.to)
		}
	}
	return s
}
