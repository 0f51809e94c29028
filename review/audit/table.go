package audit

import (
	"encoding/csv"
	"io"
	"math"
	"strconv"
	"strings"
)

// baseHeader are the columns of summary.csv before the settings columns.
var baseHeader = []string{
	"case", "source", "status", "reason",
	"target_ml", "coverage_pct", "coverage_of_target_pct", "coverage_p05_pct", "coverage_p95_pct",
	"not_monitored_pct", "holes", "largest_hole_ml",
	"outside_margin_ml", "avoid_lethal_ml", "quality_flags",
}

// tailHeader are the columns after the settings columns.
var tailHeader = []string{"settings_sha256", "input_sha256", "seconds", "resumed"}

// Header returns the columns of summary.csv for the given settings
// columns: case, source, status, reason, the Metrics (target_ml,
// coverage_pct, coverage_of_target_pct, coverage_p05_pct, coverage_p95_pct, not_monitored_pct,
// holes, largest_hole_ml, outside_margin_ml, avoid_lethal_ml),
// quality_flags (separated by "; "), one column per setting, then
// settings_sha256, input_sha256, seconds and resumed. An analysed case
// with no part of its target monitored has "not measurable" as its
// coverage_pct.
func Header(settings []Column) []string {
	h := append([]string{}, baseHeader...)
	for _, c := range settings {
		h = append(h, c.Name)
	}
	return append(h, tailHeader...)
}

// Record returns the row's cells in the order of Header(settings).
func (r Row) Record(settings []Column) []string {
	m := r.Metrics
	out := []string{
		r.Case, flat(r.Source), string(r.Status), oneLine(r.Reason),
		m.TargetML.cell(), m.CoveragePct.cell(), m.CoverageOfTargetPct.cell(), m.CoverageP05Pct.cell(), m.CoverageP95Pct.cell(),
		m.NotMonitoredPct.cell(), strconv.Itoa(m.Holes), m.LargestHoleML.cell(),
		m.OutsideMarginML.cell(), m.AvoidLethalML.cell(), flat(strings.Join(r.Flags, "; ")),
	}
	if r.Status != StatusOK {
		out[10] = "" // holes not counted
	} else if math.IsNaN(float64(m.CoveragePct)) {
		out[5] = "not measurable" // no part of the target monitored: no figure, not 0
	}
	for _, c := range settings {
		out = append(out, c.Value)
	}
	return append(out, r.SettingsHash, r.InputSHA256,
		strconv.FormatFloat(r.Seconds, 'f', 2, 64), strconv.FormatBool(r.Resumed))
}

// WriteCSV writes the summary table: Header(settings), then one line per
// row (RFC 4180 quoting).
func WriteCSV(w io.Writer, rows []Row, settings []Column) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(Header(settings)); err != nil {
		return err
	}
	for _, r := range rows {
		if err := cw.Write(r.Record(settings)); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteErrors writes the cases that were not analysed: a header "case,
// source, status, reason" and one line per incomplete or failed case.
func WriteErrors(w io.Writer, rows []Row) error {
	cw := csv.NewWriter(w)
	if err := cw.Write([]string{"case", "source", "status", "reason"}); err != nil {
		return err
	}
	for _, r := range rows {
		if r.Status == StatusOK {
			continue
		}
		if err := cw.Write([]string{r.Case, flat(r.Source), string(r.Status), oneLine(r.Reason)}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// flat replaces line breaks by spaces, so that every row of a table is one
// line and shard tables can be joined line by line.
func flat(s string) string {
	return strings.NewReplacer("\r\n", " ", "\n", " ", "\r", " ").Replace(s)
}

// oneLine keeps the first line of s (a panic's stack trace stays in the
// case record only).
func oneLine(s string) string {
	s, _, _ = strings.Cut(s, "\n")
	return flat(s)
}
