//go:build cgo

package main

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"dosecover/review/audit"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"
)

// The table of the audit window: its columns, sorting, cells and the
// selected case.

// auditColumn is one column of the audit table.
type auditColumn struct {
	title string
	width float32
	tip   string // the full name, unit and meaning, shown on hover over the header
	text  func(r audit.Row) string
	key   func(r audit.Row) float64 // numeric sort key; nil: sort by text
}

func pctCell(x audit.Num) string { return fmtOpt(float64(x), "%.1f") }

// coverageCell is the covered percentage of an audited case: "not
// measurable" when the case was analysed with no part of its target
// monitored.
func coverageCell(r audit.Row) string {
	if r.Status == audit.StatusOK && math.IsNaN(float64(r.Metrics.CoveragePct)) {
		return "not measurable"
	}
	return pctCell(r.Metrics.CoveragePct)
}
func mlCell(x audit.Num) string  { return fmtOpt(float64(x), "%.2f") }
func numKey(x audit.Num) float64 { return float64(x) }
func statusWord(r audit.Row) string {
	switch r.Status {
	case audit.StatusOK:
		if r.Resumed {
			return "ok (earlier run)"
		}
		return "ok"
	case audit.StatusIncomplete:
		return "INCOMPLETE"
	case audit.StatusFailed:
		return "FAILED"
	}
	return string(r.Status)
}

// caseLabel is how a row names its case: its source path below the input
// folder, or the pseudonym of a de-identified audit.
func caseLabel(r audit.Row) string {
	if r.Source != "" {
		return r.Source
	}
	return r.Case
}

var auditColumns = []auditColumn{
	{"case", 200, "Case: its folder below the input folder, or its pseudonym in a de-identified audit", caseLabel, nil},
	{"status", 150, "Status: ok (analysed; \"earlier run\" when resumed), INCOMPLETE (lacks thermometry, contours or another input) or FAILED (could not be read or analysed); the reason says why", statusWord, nil},
	{"covered %", 110, "Coverage, % of the monitored target: target volume at or above the lethal threshold", func(r audit.Row) string { return coverageCell(r) }, func(r audit.Row) float64 { return numKey(r.Metrics.CoveragePct) }},
	{"p05–p95 %", 104, "Coverage noise band, % of the monitored target: 5th to 95th percentile of the coverage under thermometry noise", func(r audit.Row) string {
		m := r.Metrics
		if math.IsNaN(float64(m.CoverageP05Pct)) || math.IsNaN(float64(m.CoverageP95Pct)) {
			return "—"
		}
		return fmt.Sprintf("%.1f–%.1f", float64(m.CoverageP05Pct), float64(m.CoverageP95Pct))
	}, func(r audit.Row) float64 { return numKey(r.Metrics.CoverageP05Pct) }},
	{"not monitored %", 128, "Not monitored, % of the target: target volume without valid thermometry", func(r audit.Row) string { return pctCell(r.Metrics.NotMonitoredPct) }, func(r audit.Row) float64 { return numKey(r.Metrics.NotMonitoredPct) }},
	{"holes", 60, "Holes, count: connected regions inside the target below the lethal threshold", func(r audit.Row) string {
		if r.Status != audit.StatusOK {
			return "—"
		}
		return strconv.Itoa(r.Metrics.Holes)
	}, func(r audit.Row) float64 {
		if r.Status != audit.StatusOK {
			return math.NaN()
		}
		return float64(r.Metrics.Holes)
	}},
	{"largest hole mL", 124, "Largest hole, mL: volume of the largest hole in the target", func(r audit.Row) string { return mlCell(r.Metrics.LargestHoleML) }, func(r audit.Row) float64 { return numKey(r.Metrics.LargestHoleML) }},
	{"lethal outside margin mL", 184, "Lethal outside the margin, mL: volume at or above the lethal threshold beyond the target and its safety margin", func(r audit.Row) string { return mlCell(r.Metrics.OutsideMarginML) }, func(r audit.Row) float64 { return numKey(r.Metrics.OutsideMarginML) }},
	{"avoid lethal mL", 124, "Lethal in avoid structures, mL: volume at or above the lethal threshold inside the avoid structures", func(r audit.Row) string { return mlCell(r.Metrics.AvoidLethalML) }, func(r audit.Row) float64 { return numKey(r.Metrics.AvoidLethalML) }},
	{"reason", 320, "Reason: why a case is incomplete or failed (its first line; the selected case's below the table)", func(r audit.Row) string { s, _, _ := strings.Cut(r.Reason, "\n"); return s }, nil},
	{"flags", 300, "Quality flags: short remarks on the case's thermometry (motion, drift ...)", func(r audit.Row) string {
		if len(r.Flags) == 0 {
			return ""
		}
		return strings.Join(r.Flags, "; ")
	}, nil},
}

// columnIndex returns the index of the audit table's column title; -1
// when there is none.
func columnIndex(title string) int {
	for n, c := range auditColumns {
		if c.title == title {
			return n
		}
	}
	return -1
}

// setRows shows rows (nil clears the table) of the audit in outDir.
func (av *auditView) setRows(rows []audit.Row, outDir string) {
	av.rows = append([]audit.Row(nil), rows...)
	av.outDir = outDir
	av.table.UnselectAll()
	av.selected = -1
	av.updateSelection()
	av.resort()
}

// resort orders the rows by the chosen column and redraws the table.
// Rows without a value (NaN) go last either way.
func (av *auditView) resort() {
	sel := ""
	if av.selected >= 0 && av.selected < len(av.rows) {
		sel = av.rows[av.selected].Case
	}
	if av.sortCol < 0 {
		sort.SliceStable(av.rows, func(a, b int) bool { return av.rows[a].Case < av.rows[b].Case })
	} else {
		c := auditColumns[av.sortCol]
		sort.SliceStable(av.rows, func(a, b int) bool {
			ra, rb := av.rows[a], av.rows[b]
			if c.key != nil {
				ka, kb := c.key(ra), c.key(rb)
				if math.IsNaN(ka) || math.IsNaN(kb) {
					return !math.IsNaN(ka) && math.IsNaN(kb)
				}
				if av.sortDesc {
					return ka > kb
				}
				return ka < kb
			}
			ta, tb := c.text(ra), c.text(rb)
			if av.sortDesc {
				return ta > tb
			}
			return ta < tb
		})
	}
	if len(av.rows) == 0 {
		av.noRows.Show()
	} else {
		av.noRows.Hide()
	}
	av.selected = -1
	for n, r := range av.rows {
		if r.Case == sel && sel != "" {
			av.selected = n
		}
	}
	if av.selected >= 0 {
		av.table.Select(widget.TableCellID{Row: av.selected, Col: 0})
	} else if sel != "" {
		av.table.UnselectAll()
	}
	av.table.Refresh()
}

// sortBy sorts by column col; a second click on the same column reverses
// the order.
func (av *auditView) sortBy(col int) {
	if av.sortCol == col {
		av.sortDesc = !av.sortDesc
	} else {
		av.sortCol, av.sortDesc = col, false
	}
	av.resort()
}

// auditCell is one cell of the audit table: an icon (status column only)
// and a label, cut where it does not fit with its full text on hover. It
// passes taps on to the table and opens the case on a double tap.
type auditCell struct {
	widget.BaseWidget
	av   *auditView
	id   widget.TableCellID
	icon *widget.Icon
	text *tipLabel
}

func newAuditCell(av *auditView) *auditCell {
	c := &auditCell{av: av, icon: widget.NewIcon(nil), text: newTipLabel(av.tips)}
	c.ExtendBaseWidget(c)
	return c
}

func (c *auditCell) CreateRenderer() fyne.WidgetRenderer {
	return widget.NewSimpleRenderer(container.NewBorder(nil, nil, c.icon, nil, c.text))
}

// Tapped selects the cell's row.
func (c *auditCell) Tapped(*fyne.PointEvent) { c.av.table.Select(c.id) }

// DoubleTapped opens the row's case.
func (c *auditCell) DoubleTapped(*fyne.PointEvent) {
	c.av.table.Select(c.id)
	c.av.openSelected()
}

func (av *auditView) newTable() *widget.Table {
	t := widget.NewTableWithHeaders(
		func() (int, int) { return len(av.rows), len(auditColumns) },
		func() fyne.CanvasObject { return newAuditCell(av) },
		func(id widget.TableCellID, o fyne.CanvasObject) {
			c := o.(*auditCell)
			c.id = id
			if id.Row >= len(av.rows) {
				return
			}
			r := av.rows[id.Row]
			c.text.Importance = widget.MediumImportance
			c.text.TextStyle.Bold = id.Row == av.selected // the whole selected row stands out
			c.icon.Hide()
			if id.Col == 1 {
				c.icon.Show()
				switch r.Status {
				case audit.StatusOK:
					c.icon.SetResource(theme.ConfirmIcon())
				case audit.StatusIncomplete:
					c.icon.SetResource(theme.NewWarningThemedResource(theme.WarningIcon()))
					c.text.Importance = widget.WarningImportance
				default:
					c.icon.SetResource(theme.NewErrorThemedResource(theme.ErrorIcon()))
					c.text.Importance = widget.DangerImportance
				}
			}
			if auditColumns[id.Col].title == "reason" && r.Status != audit.StatusOK {
				c.text.Importance = widget.WarningImportance
			}
			c.text.SetText(auditColumns[id.Col].text(r))
			c.text.Refresh()
		})
	t.CreateHeader = func() fyne.CanvasObject {
		b := newTipButton(av.tips)
		b.Alignment = widget.ButtonAlignLeading
		b.Importance = widget.LowImportance
		b.IconPlacement = widget.ButtonIconTrailingText
		return b
	}
	t.UpdateHeader = func(id widget.TableCellID, o fyne.CanvasObject) {
		b := o.(*tipButton)
		if id.Row >= 0 || id.Col < 0 {
			b.SetText("")
			b.setTip("")
			b.SetIcon(nil)
			b.OnTapped = nil
			return
		}
		col := id.Col
		b.SetText(auditColumns[col].title)
		b.setTip(auditColumns[col].tip)
		switch {
		case av.sortCol != col:
			b.SetIcon(nil)
		case av.sortDesc:
			b.SetIcon(theme.MoveDownIcon())
		default:
			b.SetIcon(theme.MoveUpIcon())
		}
		b.OnTapped = func() { av.sortBy(col) }
	}
	t.ShowHeaderColumn = false
	t.StickyColumnCount = 1
	for n, c := range auditColumns {
		t.SetColumnWidth(n, c.width)
	}
	t.OnSelected = func(id widget.TableCellID) {
		if id.Row >= 0 && id.Row < len(av.rows) {
			prev := av.selected
			av.selected = id.Row
			av.updateSelection()
			if prev != id.Row {
				av.table.Refresh()
			}
		}
	}
	return t
}

// updateSelection states the selected case and enables its buttons.
func (av *auditView) updateSelection() {
	if av.selected < 0 || av.selected >= len(av.rows) {
		av.selInfo.SetText("Select a case; double-click or “Open case” shows it in the review window.")
		av.openBtn.Disable()
		av.repBtn.Disable()
		return
	}
	r := av.rows[av.selected]
	text := caseLabel(r) + ": " + statusWord(r)
	if r.Reason != "" {
		s, _, _ := strings.Cut(r.Reason, "\n")
		text += " — " + s
	}
	av.selInfo.SetText(text)
	av.openBtn.Enable()
	if r.Dir != "" && len(r.Artifacts) > 0 {
		av.repBtn.Enable()
	} else {
		av.repBtn.Disable()
	}
}
