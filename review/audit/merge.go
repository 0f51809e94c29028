package audit

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/safefile"
)

// The states of a shard in its state file.
const (
	ShardRunning     = "running"     // started; not (yet) finished
	ShardInterrupted = "interrupted" // stopped by Ctrl-C or SIGTERM before its end
	ShardFinished    = "finished"    // every case of the shard has a result
)

// ShardStateFile returns the name of the state file of shard s in the
// output folder: shard-I-of-N.json.
func ShardStateFile(s Shard) string {
	return fmt.Sprintf("shard-%d-of-%d.json", s.Index, s.Count)
}

// ShardState is the file OUT_DIR/shard-I-of-N.json that a sharded run
// writes when it starts (State "running") and again when it ends
// ("finished" with its Rows, or "interrupted"). A shard killed or lost with
// its machine stays "running". Merge joins the Rows of the finished shards.
type ShardState struct {
	Shard      string    `json:"shard"` // "I/N"
	State      string    `json:"state"` // ShardRunning, ShardInterrupted or ShardFinished
	Host       string    `json:"host"`  // machine that runs or ran the shard
	PID        int       `json:"pid"`   // its process on Host
	StartedUTC time.Time `json:"started_utc"`
	EndedUTC   time.Time `json:"ended_utc"` // zero while running
	Version    string    `json:"dosecover_version"`
	// SettingsHash and Settings are the shard's analysis settings (hash
	// and canonical JSON, as in every case record).
	SettingsHash    string          `json:"settings_sha256"`
	Settings        json.RawMessage `json:"settings"`
	SettingsColumns []stateColumn   `json:"settings_columns"`
	Deidentified    bool            `json:"deidentified"`
	// CasesFound is the number of cases found below the input folders
	// before sharding, and CaseListHash the SHA-256 over their Names
	// (sorted, each followed by a newline): every shard of one audit sees
	// the same list.
	CasesFound   int        `json:"cases_found"`
	CaseListHash string     `json:"case_list_sha256"`
	Rows         []stateRow `json:"rows"` // the shard's cases, when finished
}

type stateColumn struct {
	Name  string `json:"name"`
	Value string `json:"value"`
}

// stateRow is a Row as stored in a shard's state file: every field that
// goes into the summary files, numbers at full precision.
type stateRow struct {
	Case         string   `json:"case"`
	Source       string   `json:"source,omitempty"`
	Status       Status   `json:"status"`
	Reason       string   `json:"reason,omitempty"`
	Metrics      Metrics  `json:"metrics"`
	Flags        []string `json:"quality_flags"`
	InputSHA256  string   `json:"input_sha256"`
	SettingsHash string   `json:"settings_sha256"`
	Seconds      float64  `json:"seconds"`
	Resumed      bool     `json:"resumed"`
	Artifacts    []string `json:"artifacts"`
}

// newShardState describes a sharded run that is starting: all is every
// case found before sharding.
func newShardState(cfg *Config, settings []byte, settingsHash string, all []Case) *ShardState {
	host, _ := os.Hostname()
	names := make([]string, len(all))
	for k, c := range all {
		names[k] = c.Name
	}
	sort.Strings(names)
	h := sha256.New()
	for _, n := range names {
		io.WriteString(h, n+"\n")
	}
	st := &ShardState{
		Shard: cfg.Shard.String(), State: ShardRunning, Host: host, PID: os.Getpid(),
		StartedUTC: time.Now().UTC().Truncate(time.Second), Version: dosemap.Version,
		SettingsHash: settingsHash, Settings: settings, Deidentified: cfg.Deidentify,
		SettingsColumns: []stateColumn{}, CasesFound: len(all), CaseListHash: hex.EncodeToString(h.Sum(nil)),
		Rows: []stateRow{},
	}
	for _, c := range cfg.SettingsColumns {
		st.SettingsColumns = append(st.SettingsColumns, stateColumn(c))
	}
	return st
}

// write stores the state in outDir (atomically).
func (st *ShardState) write(outDir string, s Shard) error {
	return writeAtomic(filepath.Join(outDir, ShardStateFile(s)), func(w io.Writer) error {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(st)
	})
}

// end stores the state the run ended in, with its rows when finished.
func (st *ShardState) end(outDir string, s Shard, state string, rows []Row) error {
	st.State = state
	st.EndedUTC = time.Now().UTC().Truncate(time.Second)
	st.Rows = []stateRow{}
	if state == ShardFinished {
		for _, r := range rows {
			st.Rows = append(st.Rows, stateRow{
				Case: r.Case, Source: r.Source, Status: r.Status, Reason: r.Reason, Metrics: r.Metrics,
				Flags: r.Flags, InputSHA256: r.InputSHA256, SettingsHash: r.SettingsHash,
				Seconds: r.Seconds, Resumed: r.Resumed, Artifacts: r.Artifacts,
			})
		}
	}
	return st.write(outDir, s)
}

// writeSummaries writes the three summary files of rows into outDir:
// base.csv (WriteCSV), errName.csv (WriteErrors) and base.png
// (WriteFigure), each atomically, and returns their paths. A whole run,
// a shard and Merge all write them here.
func writeSummaries(outDir, base, errName string, rows []Row, columns []Column) ([]string, error) {
	files := []struct {
		name string
		fill func(io.Writer) error
	}{
		{base + ".csv", func(w io.Writer) error { return WriteCSV(w, rows, columns) }},
		{errName + ".csv", func(w io.Writer) error { return WriteErrors(w, rows) }},
		{base + ".png", func(w io.Writer) error { return WriteFigure(w, rows) }},
	}
	var out []string
	for _, f := range files {
		p := filepath.Join(outDir, f.name)
		if err := writeAtomic(p, f.fill); err != nil {
			return out, err
		}
		out = append(out, p)
	}
	return out, nil
}

// MergeError reports a merge refused because the shards in the output
// folder do not make one complete audit. Nothing was written.
type MergeError struct {
	OutDir   string   // the output folder as given
	Problems []string // one line per shard missing, unfinished or different
}

// Error names the folder and every problem.
func (e *MergeError) Error() string {
	return fmt.Sprintf("cannot merge the shards in %s; nothing was written:\n  %s",
		e.OutDir, strings.Join(e.Problems, "\n  "))
}

var shardStateName = regexp.MustCompile(`^shard-([0-9]+)-of-([0-9]+)\.json$`)

// removeShardStates removes the shard state files (shard-I-of-N.json,
// regular files only) of outDir.
func removeShardStates(outDir string) error {
	entries, err := os.ReadDir(outDir)
	if err != nil {
		return fmt.Errorf("removing the shard state files of an earlier split in %s: %w", outDir, err)
	}
	for _, e := range entries {
		if !e.Type().IsRegular() || !shardStateName.MatchString(e.Name()) {
			continue
		}
		if err := os.Remove(filepath.Join(outDir, e.Name())); err != nil && !os.IsNotExist(err) {
			return fmt.Errorf("removing the shard state files of an earlier split in %s: %w", outDir, err)
		}
	}
	return nil
}

// Merge joins the shards of an audit in outDir (runs with Shard I/N, for
// every I of one N, into the same folder) into summary.csv, errors.csv and
// summary.png, written exactly as a whole run over the same cases writes
// them: the same rows in the same order with the same figures (each case's
// seconds and resumed cells are those of its shard's run). It refuses with
// a *MergeError, writing nothing, when a shard of the N is missing, has not
// finished (running, interrupted, or killed and so left "running"), was
// made with other settings than outDir/settings.json or with another
// version of dosecover, or saw another list of cases than the others; the
// error names each. A shard found unfinished can be run again alone with
// Resume, which redoes only its cases without a result.
func Merge(outDir string) (*Summary, error) {
	if outDir == "" {
		return nil, &UsageError{"no output folder given"}
	}
	if err := safefile.CheckDir("audit folder", outDir); err != nil {
		return nil, err
	}
	entries, err := os.ReadDir(outDir)
	if err != nil {
		return nil, &safefile.PathError{What: "reading audit folder", Path: outDir, Err: err}
	}
	counts := map[int][]int{} // N -> the I found
	for _, e := range entries {
		m := shardStateName.FindStringSubmatch(e.Name())
		if m == nil {
			continue
		}
		i, _ := strconv.Atoi(m[1])
		n, _ := strconv.Atoi(m[2])
		if i >= 1 && i <= n {
			counts[n] = append(counts[n], i)
		}
	}
	switch len(counts) {
	case 0:
		return nil, fmt.Errorf("audit folder %s holds no shards (no shard-I-of-N.json): merge joins the results of runs with --shard I/N into one folder; a whole run writes summary.csv itself", outDir)
	case 1:
	default:
		var splits []string
		for n, is := range counts {
			sort.Ints(is)
			splits = append(splits, fmt.Sprintf("%d of %d (shard %s)", len(is), n, joinInts(is, ", ")))
		}
		sort.Strings(splits)
		return nil, &MergeError{OutDir: outDir, Problems: []string{
			"the folder holds shards of different splits: " + strings.Join(splits, "; ") +
				"; remove the state files (shard-I-of-N.json) of the split not wanted, and run its missing shards with --resume"}}
	}
	var n int
	for k := range counts {
		n = k
	}

	settingsPath := filepath.Join(outDir, SettingsFile)
	settings, err := readSettingsFile(settingsPath)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("audit folder %s: %s is missing; every shard writes it when it starts", outDir, SettingsFile)
		}
		return nil, err
	}
	host, _ := os.Hostname()
	var problems []string
	var states []*ShardState
	for i := 1; i <= n; i++ {
		s := Shard{Index: i, Count: n}
		p := filepath.Join(outDir, ShardStateFile(s))
		st, err := readShardState(p)
		if errors.Is(err, fs.ErrNotExist) {
			problems = append(problems, fmt.Sprintf("shard %s is missing (no %s): run it with --shard %s", s, ShardStateFile(s), s))
			continue
		}
		if err != nil {
			problems = append(problems, fmt.Sprintf("shard %s: %v", s, err))
			continue
		}
		if msg := unfinished(st, s, host); msg != "" {
			problems = append(problems, msg)
			continue
		}
		if st.Version != dosemap.Version {
			problems = append(problems, fmt.Sprintf("shard %s was made by dosecover %s, this is dosecover %s: one table never mixes versions of the method; run the shard again with this version (--resume)", s, st.Version, dosemap.Version))
		}
		canon, err := CanonicalSettings(st.Settings)
		if err != nil {
			problems = append(problems, fmt.Sprintf("shard %s: %s: %v", s, ShardStateFile(s), err))
		} else if err := compareSettings(outDir, settingsPath, settings, canon); err != nil {
			var ce *SettingsConflictError
			if errors.As(err, &ce) {
				err = errors.New(strings.Join(ce.Differences, "; "))
			}
			problems = append(problems, fmt.Sprintf("shard %s was made with other settings than %s: %v; run it again with the settings of the audit", s, SettingsFile, err))
		}
		states = append(states, st)
	}
	// The shards must describe one audit: the same cases found, the same
	// kind of records, the same settings columns.
	if len(states) > 1 {
		first := states[0]
		for _, st := range states[1:] {
			if st.CaseListHash != first.CaseListHash || st.CasesFound != first.CasesFound {
				problems = append(problems, fmt.Sprintf("shard %s found %d cases below its input folders, shard %s found %d (or other ones): the input folders changed between the shards or were given differently; run the shards again over the same folders (--resume keeps the cases done)",
					st.Shard, st.CasesFound, first.Shard, first.CasesFound))
			}
			if st.Deidentified != first.Deidentified {
				problems = append(problems, fmt.Sprintf("shard %s is %s, shard %s %s: one audit never mixes the two", st.Shard, kind(st.Deidentified), first.Shard, kind(first.Deidentified)))
			}
			if !sameColumns(st.SettingsColumns, first.SettingsColumns) {
				problems = append(problems, fmt.Sprintf("shard %s has other settings columns than shard %s", st.Shard, first.Shard))
			}
		}
	}
	if len(problems) > 0 {
		return nil, &MergeError{OutDir: outDir, Problems: problems}
	}

	abs, err := filepath.Abs(outDir)
	if err != nil {
		return nil, fmt.Errorf("audit folder %s: %w", outDir, err)
	}
	sum := &Summary{}
	seen := map[string]string{}
	for _, st := range states {
		for _, sr := range st.Rows {
			if other, dup := seen[sr.Case]; dup {
				problems = append(problems, fmt.Sprintf("case %s is in shard %s and in shard %s", sr.Case, other, st.Shard))
				continue
			}
			seen[sr.Case] = st.Shard
			sum.Rows = append(sum.Rows, Row{
				Case: sr.Case, Source: sr.Source, Status: sr.Status, Reason: sr.Reason, Metrics: sr.Metrics,
				Flags: sr.Flags, InputSHA256: sr.InputSHA256, SettingsHash: sr.SettingsHash,
				Seconds: sr.Seconds, Resumed: sr.Resumed, Artifacts: sr.Artifacts,
				Dir: filepath.Join(abs, "cases", sr.Case),
			})
		}
	}
	if len(problems) == 0 && len(sum.Rows) != states[0].CasesFound {
		problems = append(problems, fmt.Sprintf("the shards hold %d cases, their runs found %d", len(sum.Rows), states[0].CasesFound))
	}
	if len(problems) > 0 {
		return nil, &MergeError{OutDir: outDir, Problems: problems}
	}
	var columns []Column
	for _, c := range states[0].SettingsColumns {
		columns = append(columns, Column(c))
	}
	sum.Header = Header(columns)
	// The order of a whole run (Run sorts its rows by Case).
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
	sum.Files, err = writeSummaries(abs, "summary", "errors", sum.Rows, columns)
	return sum, err
}

// unfinished returns why shard s (state st) has not finished, or "".
func unfinished(st *ShardState, s Shard, host string) string {
	switch st.State {
	case ShardFinished:
		return ""
	case ShardInterrupted:
		return fmt.Sprintf("shard %s was interrupted at %s before it finished: run it again with --resume, then merge",
			s, st.EndedUTC.Format(time.RFC3339))
	case ShardRunning:
	default:
		return fmt.Sprintf("shard %s: unknown state %q in %s", s, st.State, ShardStateFile(s))
	}
	started := st.StartedUTC.Format(time.RFC3339)
	if st.Host == host && st.Host != "" {
		if processGone(st.PID) {
			return fmt.Sprintf("shard %s did not finish: its process %d on %s, started %s, is gone (killed, or the machine restarted); run it again with --resume, then merge",
				s, st.PID, st.Host, started)
		}
		return fmt.Sprintf("shard %s is still running (process %d on %s, started %s): wait until it finishes, then merge", s, st.PID, st.Host, started)
	}
	return fmt.Sprintf("shard %s has not finished: it started %s on %s (process %d) and is still running there, or stopped before its end (killed, node lost); once it is not running, run it again with --resume, then merge",
		s, started, st.Host, st.PID)
}

// readShardState reads a shard state file.
func readShardState(p string) (*ShardState, error) {
	b, err := os.ReadFile(p)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, err
		}
		return nil, &safefile.PathError{What: "reading", Path: p, Err: err}
	}
	var st ShardState
	if err := json.Unmarshal(b, &st); err != nil {
		return nil, fmt.Errorf("%s is not a shard state file of dosecover: %w", p, err)
	}
	if st.State == "" || st.Shard == "" {
		return nil, fmt.Errorf("%s is not a shard state file of dosecover", p)
	}
	return &st, nil
}

func kind(deid bool) string {
	if deid {
		return "de-identified"
	}
	return "identified"
}

func sameColumns(a, b []stateColumn) bool {
	if len(a) != len(b) {
		return false
	}
	for k := range a {
		if a[k] != b[k] {
			return false
		}
	}
	return true
}

func joinInts(v []int, sep string) string {
	s := make([]string, len(v))
	for k, x := range v {
		s[k] = strconv.Itoa(x)
	}
	return strings.Join(s, sep)
}
