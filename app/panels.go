//go:build cgo

package main

import (
	"fmt"
	"image/color"
	"math"
	"sort"
	"strings"

	"dosecover/dosemap"
	"dosecover/review"
	"dosecover/review/view"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"
)

// Legend entries of the overlays (palette: review/palette.go).
type swatchStyle int

const (
	swatchSolid swatchStyle = iota
	swatchDashed
	swatchDotted
	swatchHatched
	swatchFill
)

var overlayLegend = []struct {
	name  string
	c     color.RGBA
	style swatchStyle
}{
	{"target", view.ColorTarget, swatchSolid},
	{"margin", view.ColorMargin, swatchDashed},
	{"lethal isoline", view.ColorLethal, swatchSolid},
	{"hole", view.ColorHole, swatchHatched},
	{"lethal outside margin", view.ColorSpill, swatchFill},
	{"avoid", view.ColorAvoid, swatchDotted},
	{"not monitored", view.ColorNotMonitored, swatchHatched},
	{"measured plane", view.ColorPlane, swatchSolid},
}

// legendSwatch draws a small sample of an overlay style.
func legendSwatch(style swatchStyle, c color.RGBA) fyne.CanvasObject {
	r := canvas.NewRasterWithPixels(func(x, y, w, h int) color.Color {
		bg := color.RGBA{0x30, 0x30, 0x34, 0xFF}
		mid := h / 2
		switch style {
		case swatchSolid:
			if y >= mid-1 && y <= mid+1 {
				return c
			}
		case swatchDashed:
			if y >= mid-1 && y <= mid+1 && (x/5)%2 == 0 {
				return c
			}
		case swatchDotted:
			if y >= mid-1 && y <= mid+1 && (x/2)%2 == 0 {
				return c
			}
		case swatchHatched:
			if (x+y)%5 < 2 {
				return c
			}
		case swatchFill:
			return c
		}
		return bg
	})
	r.SetMinSize(fyne.NewSize(22, 12))
	return container.NewCenter(r)
}

// pin fixes the probe at p and plots its temperature history. The
// history is computed off the UI goroutine (the first pin of a case
// computes the temperature of every sonication).
func (rw *reviewWindow) pin(p dosemap.Vec3) {
	rw.pinned = &p
	rw.opt.Marker = &p
	rw.redraw()
	if rw.loaded == nil {
		return
	}
	where := fmt.Sprintf("(%.1f, %.1f, %.1f) mm", p[0], p[1], p[2])
	if rw.sess == nil {
		rw.probeMsg.SetText("Pinned " + where + ". The temperature history appears once the analysis has run.")
		return
	}
	rw.probeMsg.SetText("Pinned " + where + ": computing its temperature history…")
	sess, set := rw.sess, rw.settings
	rw.probeGen++
	gen := rw.probeGen
	go func() {
		c, err := sess.Probe(p, set)
		fyne.Do(func() {
			defer rw.auxDone.Add(1)
			if gen != rw.probeGen {
				return
			}
			if err != nil {
				rw.probeMsg.SetText("Pinned " + where + ": " + err.Error())
				rw.probe.set(nil)
				return
			}
			msg := "Voxel centre " + rw.describePoint(c.Voxel)
			if math.IsNaN(c.LethalAt) {
				msg += fmt.Sprintf(" · did not reach %s %s (final %s)", fmtNum(c.Threshold), c.Unit, fmtDose(c.FinalDose))
			} else {
				msg += fmt.Sprintf(" · reached %s %s at %.0f s (final %s)", fmtNum(c.Threshold), c.Unit, c.LethalAt, fmtDose(c.FinalDose))
			}
			rw.probeCurve = c
			rw.probeMsg.SetText(msg)
			rw.probe.below = func() *plotPlot { return probeDosePlot(c) }
			rw.probe.set(func() *plotPlot { return probePlot(c) })
		})
	}()
}

// Sonication table columns: the short title of the header and, shown
// while the pointer rests on the header, the full name with its unit and
// what the column means ("{unit}" stands for the dose model's unit).
var sonColumns = []struct {
	title string
	width float32
	tip   string
}{
	{"use", 48, "Use: tick to include this sonication in the cumulative dose; untick to re-analyse without it"},
	{"no.", 40, "Number: the sonication's number as the session gives it"},
	{"time", 62, "Start time, m:ss: time from the start of the first sonication to the start of this one"},
	{"label", 214, "Label: the sonication's name as its series gives it (\"sonication n\" in teaching mode)"},
	{"peak °C", 70, "Peak temperature, °C: hottest valid thermometry voxel over this sonication's frames"},
	{"peak dose", 90, "Peak dose, {unit}: highest thermal dose of this sonication alone"},
	{"lethal added mL", 124, "Lethal volume added, mL: tissue whose cumulative dose first reached the lethal threshold with this sonication"},
	{"coverage added", 118, "Added coverage, % of the monitored target: target covered first by this sonication"},
	{"outside margin added mL", 184, "Lethal volume added outside the margin, mL: tissue beyond the target and its safety margin first reaching the lethal threshold with this sonication"},
	{"cooled s", 76, "Cooling time, s: from the previous sonication's last thermometry frame to this one's first"},
	{"residual °C", 96, "Residual heat, °C: largest rise estimated to be left from earlier sonications at this one's baseline over the target and margin, which the thermometry does not see (highlighted above the warning level)"},
	{"quality and notes", 560, "Quality flags and notes: frames rejected, suspected phase wraps, drift removed, motion, share of invalid voxel-frames"},
}

// sonColumnTip is the hover text of the sonication table's column col,
// with the dose unit of the analysis on screen.
func (rw *reviewWindow) sonColumnTip(col int) string {
	unit := rw.settings.Unit()
	if rw.result != nil && rw.result.Unit != "" {
		unit = rw.result.Unit
	}
	return strings.ReplaceAll(sonColumns[col].tip, "{unit}", unit)
}

// sonKey is the value column col sorts sonication rows by (the check box
// column sorts by inclusion, the notes by their flags).
func (rw *reviewWindow) sonKey(r sonicationRow, col int) float64 {
	switch col {
	case 0:
		if excludedSet(rw.settings)[r.Number] {
			return 1
		}
		return 0
	case 2:
		return r.Offset
	case 4:
		return r.PeakTemp
	case 5:
		return r.PeakDose
	case 6:
		return r.DoseAddedML
	case 7:
		return r.CoverageAdded
	case 8:
		return r.OutsideML
	case 9:
		return r.CoolingS
	case 10:
		return r.ResidualC
	case 11:
		if r.Flagged {
			return 1
		}
		return 0
	}
	return float64(r.Number)
}

// sonIndex returns the index in the result's rows of table row n, in the
// order the user chose by tapping a column header (delivery order first).
func (rw *reviewWindow) sonIndex(n int) int {
	rows := rw.result.SonRows
	if len(rw.sonOrder) != len(rows) {
		rw.sonOrder = make([]int, len(rows))
		for i := range rows {
			rw.sonOrder[i] = i
		}
		col, desc := rw.sonSort, rw.sonDesc
		sort.SliceStable(rw.sonOrder, func(a, b int) bool {
			if col == 3 {
				x, y := rows[rw.sonOrder[a]].Label, rows[rw.sonOrder[b]].Label
				return x < y != desc && x != y
			}
			x, y := rw.sonKey(rows[rw.sonOrder[a]], col), rw.sonKey(rows[rw.sonOrder[b]], col)
			// Unknown values (NaN) go last either way.
			if math.IsNaN(x) || math.IsNaN(y) {
				return !math.IsNaN(x) && math.IsNaN(y)
			}
			if desc {
				return x > y
			}
			return x < y
		})
	}
	if n < 0 || n >= len(rw.sonOrder) {
		return n
	}
	return rw.sonOrder[n]
}

// sortSonications orders the table by column col; tapping the same
// column again reverses the order.
func (rw *reviewWindow) sortSonications(col int) {
	if rw.sonSort == col {
		rw.sonDesc = !rw.sonDesc
	} else {
		rw.sonSort, rw.sonDesc = col, false
	}
	rw.sonOrder = nil
	rw.sonTable.UnselectAll()
	rw.refreshSonTable()
}

// refreshSonTable redraws the sonication table after its rows changed.
// widget.Table lays out its scroll area only when the table itself is
// resized, so a new number of rows left the area at its old extent: no
// vertical scroll bar, and rows scrolled to beyond that extent were not
// drawn at all (the table came up empty after a re-analysis once it had
// been scrolled). Changing the size by a pixel and back lays the area out
// again for the rows there are now; the scroll position is kept, clamped
// to the new rows.
//
// The last row is taller by the width of a scroll bar, so that scrolled to
// the bottom it shows above the horizontal scroll bar.
func (rw *reviewWindow) refreshSonTable() {
	t := rw.sonTable
	moved := false
	if last := t.Length; last != nil {
		n, _ := last()
		if moved = n-1 != rw.sonLast; moved {
			if rw.sonLast >= 0 {
				t.SetRowHeight(rw.sonLast, rw.sonRowH)
			}
			if n > 0 {
				t.SetRowHeight(n-1, rw.sonRowH+theme.ScrollBarSize()+theme.Padding())
			}
			rw.sonLast = n - 1
		}
	}
	t.Refresh()
	if s := t.Size(); s.Height > 1 && s.Width > 1 {
		t.Resize(s.SubtractWidthHeight(0, 1))
		t.Resize(s)
	}
	if moved {
		// Other rows (another case): start at the top left. This also
		// keeps the table's own record of the scroll position in step
		// with its scroll area, which resets to the origin without
		// telling the table when all rows fit.
		t.ScrollToTop()
		t.ScrollToLeading()
	}
}

func (rw *reviewWindow) newSonicationTable() *widget.Table {
	t := widget.NewTableWithHeaders(
		func() (int, int) {
			if rw.result == nil {
				return 0, len(sonColumns)
			}
			return len(rw.result.SonRows), len(sonColumns)
		},
		func() fyne.CanvasObject {
			// At the top of its cell: the last row is taller (refreshSonTable).
			return container.NewVBox(container.NewStack(widget.NewCheck("", nil), newTipLabel(rw.tips)))
		},
		func(id widget.TableCellID, o fyne.CanvasObject) {
			st := o.(*fyne.Container).Objects[0].(*fyne.Container)
			chk := st.Objects[0].(*widget.Check)
			l := st.Objects[1].(*tipLabel)
			if rw.result == nil || id.Row >= len(rw.result.SonRows) {
				return
			}
			row := rw.result.SonRows[rw.sonIndex(id.Row)]
			if id.Col == 0 {
				l.Hide()
				chk.Show()
				chk.OnChanged = nil
				chk.SetChecked(!excludedSet(rw.settings)[row.Number])
				num := row.Number
				chk.OnChanged = func(on bool) { rw.setExcluded(num, !on) }
				return
			}
			chk.Hide()
			l.Show()
			l.Importance = widget.MediumImportance
			switch id.Col {
			case 1:
				l.SetText(fmt.Sprint(row.Number))
			case 2:
				l.SetText(fmtClock(row.Offset))
			case 3:
				if rw.teaching {
					l.SetText(fmt.Sprintf("sonication %d", row.Number))
				} else {
					l.SetText(row.Label)
				}
			case 4:
				l.SetText(fmtOpt(row.PeakTemp, "%.1f"))
			case 5:
				if math.IsNaN(row.PeakDose) || math.IsInf(row.PeakDose, 0) {
					l.SetText("—")
				} else {
					l.SetText(fmtDose(row.PeakDose))
				}
			case 6:
				l.SetText(fmtOpt(row.DoseAddedML, "%.2f"))
			case 7:
				l.SetText(fmtOpt(100*row.CoverageAdded, "%.1f %%"))
			case 8:
				l.SetText(fmtOpt(row.OutsideML, "%.3f"))
			case 9:
				l.SetText(fmtOpt(row.CoolingS, "%.0f"))
			case 10:
				if row.ResidualHigh {
					l.Importance = widget.WarningImportance
				}
				l.SetText(fmtOpt(row.ResidualC, "%.1f"))
			case 11:
				if excludedSet(rw.settings)[row.Number] {
					l.Importance = widget.LowImportance
					l.SetText("left out of the cumulative dose")
					return
				}
				switch {
				case len(row.Flags) == 0:
					l.SetText("no flag")
				case row.Flagged:
					l.Importance = widget.WarningImportance
					l.SetText(strings.Join(row.Flags, "; "))
				default:
					l.SetText("no flag; " + strings.Join(row.Flags, "; "))
				}
			}
		})
	t.CreateHeader = func() fyne.CanvasObject {
		b := newTipButton(rw.tips)
		b.Alignment = widget.ButtonAlignLeading
		b.Importance = widget.LowImportance
		return b
	}
	t.UpdateHeader = func(id widget.TableCellID, o fyne.CanvasObject) {
		b := o.(*tipButton)
		if id.Row < 0 && id.Col >= 0 {
			title := sonColumns[id.Col].title
			if id.Col == rw.sonSort {
				title += [2]string{" ▲", " ▼"}[btoi(rw.sonDesc)]
			}
			b.SetText(title)
			b.setTip(rw.sonColumnTip(id.Col))
			col := id.Col
			b.OnTapped = func() { rw.sortSonications(col) }
		} else {
			b.SetText("")
			b.setTip("")
			b.OnTapped = nil
		}
	}
	t.ShowHeaderColumn = false
	rw.sonLast, rw.sonRowH = -1, t.CreateCell().MinSize().Height
	for n, c := range sonColumns {
		t.SetColumnWidth(n, c.width)
	}
	t.OnSelected = func(id widget.TableCellID) {
		if id.Row >= 0 && id.Col > 0 && rw.result != nil {
			rw.selectSonication(rw.sonIndex(id.Row))
		}
	}
	return t
}

// fmtClock prints seconds as m:ss.
func fmtClock(s float64) string {
	if math.IsNaN(s) {
		return "—"
	}
	m := int(s) / 60
	return fmt.Sprintf("%d:%02d", m, int(s)-60*m)
}

func fmtOpt(v float64, f string) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "—"
	}
	return fmt.Sprintf(f, v)
}

// metricsPanel states the facts of the analysis and the thresholds used.
type metricsPanel struct {
	rw       *reviewWindow
	content  fyne.CanvasObject
	box      *fyne.Container
	signed   *widget.Label
	facts    *widget.Label
	used     *widget.Label
	holes    *fyne.Container // one row per region; no list of its own scrolls
	outside  *fyne.Container
	avoid    *widget.Label
	quality  *widget.Label
	dvh      *plotView
	coverage *plotView
	hint     *widget.Label
}

func newMetricsPanel(rw *reviewWindow) *metricsPanel {
	m := &metricsPanel{rw: rw}
	m.facts = widget.NewLabel("")
	m.facts.TextStyle.Monospace = true
	m.facts.Wrapping = fyne.TextWrapWord
	m.used = widget.NewLabel("")
	m.used.Wrapping = fyne.TextWrapWord
	m.avoid = widget.NewLabel("")
	m.avoid.Wrapping = fyne.TextWrapWord
	m.quality = widget.NewLabel("")
	m.quality.Wrapping = fyne.TextWrapWord
	m.signed = widget.NewLabel("")
	m.signed.Wrapping = fyne.TextWrapWord
	m.hint = widget.NewLabel("Facts measured from the thermometry; the clinician decides what they mean.")
	m.hint.Wrapping = fyne.TextWrapWord
	m.hint.Importance = widget.LowImportance
	m.holes = container.NewVBox()
	m.outside = container.NewVBox()
	m.dvh = newPlotView()
	m.coverage = newPlotView()
	bold := func(s string) *widget.Label {
		return widget.NewLabelWithStyle(s, fyne.TextAlignLeading, fyne.TextStyle{Bold: true})
	}
	m.box = container.NewVBox(
		bold("Coverage of the target"), m.facts,
		bold("Holes in the target (click to show)"), m.holes,
		bold("Lethal dose outside the margin (click to show)"), m.outside,
		bold("Avoid structures"), m.avoid,
		bold("Thermometry quality"), m.quality,
		bold("Settings used"), m.used,
		bold("Sign-offs"), m.signed, m.hint,
	)
	plots := container.NewAppTabs(
		container.NewTabItem("Target DVH", m.dvh.raster),
		container.NewTabItem("Coverage vs threshold", m.coverage.raster),
	)
	split := container.NewVSplit(container.NewVScroll(m.box), plots)
	split.SetOffset(0.58)
	m.content = split
	m.update()
	return m
}

// update shows the current result.
func (m *metricsPanel) update() {
	r := m.rw.result
	m.used.SetText(m.rw.settings.Describe())
	m.signed.SetText(m.rw.signOffText())
	m.rw.updateSignState()
	if r == nil {
		if m.rw.loaded == nil {
			m.facts.SetText("No case open.")
		} else {
			m.facts.SetText("Not analysed yet.")
		}
		m.avoid.SetText("")
		m.quality.SetText("")
		m.dvh.set(nil)
		m.coverage.set(nil)
		m.holes.Objects, m.outside.Objects = nil, nil
		m.box.Refresh()
		return
	}
	pct := func(f float64) string { return fmtOpt(100*f, "%.1f %%") }
	band := "not estimated"
	if r.CoveredFractionP05 != nil && r.CoveredFractionP95 != nil {
		band = fmt.Sprintf("%s – %s", pct(*r.CoveredFractionP05), pct(*r.CoveredFractionP95))
		if r.Trials > 0 {
			band += fmt.Sprintf(" (%d trials)", r.Trials)
		}
	}
	name := r.Target
	if name == "" {
		name = "target"
	}
	lines := []string{
		fmt.Sprintf("%-22s %s (%.2f mL)", "Target", name, r.TargetVolumeML),
		fmt.Sprintf("%-22s %s", "Covered (≥ threshold)", coveredText(r.Result)),
		fmt.Sprintf("%-22s %s", "  noise band p05–p95", band),
		fmt.Sprintf("%-22s %s", "  of the whole target", pct(r.CoveredFractionOfTarget)),
		fmt.Sprintf("%-22s %s", "Not monitored", pct(r.NotMonitoredFraction)),
		fmt.Sprintf("%-22s %d (%.3f mL)", "Holes", len(r.HoleRows), sumML(r.HoleRows)),
		fmt.Sprintf("%-22s %d (%.3f mL)", "Lethal outside margin", len(r.SpillRows), r.OutsideMarginLethalML),
		fmt.Sprintf("%-22s %s / %s / %s", "D98 / D50 / D2", fmtDose(ptr(r.D98)), fmtDose(ptr(r.D50)), fmtDose(ptr(r.D2))),
		fmt.Sprintf("%-22s %s", "  dose unit", r.Unit),
		fmt.Sprintf("%-22s %s %s", "Threshold", fmtNum(r.Threshold), r.Unit),
		fmt.Sprintf("%-22s %g mm", "Margin", r.MarginMM),
	}
	for n, l := range lines {
		if r.CoveredFraction == nil && strings.HasPrefix(l, "Holes ") {
			lines[n] = fmt.Sprintf("%-22s %s", "Holes", "not measurable") // holes need a monitored target
		}
	}
	if ex := m.rw.settings.Excluded; len(ex) > 0 {
		lines = append(lines, fmt.Sprintf("%-22s %v", "Sonications left out", ex))
	}
	m.facts.SetText(strings.Join(lines, "\n"))
	if len(r.AvoidRows) == 0 {
		m.avoid.SetText("No avoid structure in this case.")
	} else {
		var b []string
		for _, a := range r.AvoidRows {
			b = append(b, fmt.Sprintf("%s: %.3f mL lethal of %.2f mL, highest dose %s %s", a.Name, a.LethalML, a.VolumeML, fmtDose(a.MaxDose), r.Unit))
		}
		m.avoid.SetText(strings.Join(b, "\n"))
	}
	if len(r.Warnings) == 0 {
		m.quality.SetText("No frame was flagged.")
	} else {
		m.quality.SetText(strings.Join(r.Warnings, "\n"))
	}
	m.dvh.set(func() *plotPlot { return dvhPlot(r) })
	m.coverage.set(func() *plotPlot { return coveragePlot(r) })
	m.holes.Objects = m.regionRows(r.HoleRows, "hole")
	if r.CoveredFraction == nil {
		m.holes.Objects = []fyne.CanvasObject{widget.NewLabel("Not measurable: no part of the target is monitored.")}
	}
	m.outside.Objects = m.regionRows(r.SpillRows, "cluster")
	m.box.Refresh()
}

// prefListMin holds the size (mm³) below which listed regions are summarised in
// one line (a display setting; the analysis keeps them all).
const prefListMin = "list_min_mm3"

// regionRows lists the regions of at least the display size one per row
// (a button that shows the region, and its details wrapped below) and
// the smaller ones as one line.
func (m *metricsPanel) regionRows(rs []region, what string) []fyne.CanvasObject {
	if len(rs) == 0 {
		return []fyne.CanvasObject{widget.NewLabel("None.")}
	}
	minMM3 := m.rw.app.Preferences().FloatWithFallback(prefListMin, 1)
	var out []fyne.CanvasObject
	small, smallML := 0, 0.0
	for _, r := range rs {
		if r.VolumeML*1000 < minMM3 {
			small++
			smallML += r.VolumeML
			continue
		}
		r := r
		head := widget.NewButton(fmt.Sprintf("%s   %s mL   at (%s, %s, %s) mm", r.Label, fmtML(r.VolumeML),
			fmtMM(r.Centre[0]), fmtMM(r.Centre[1]), fmtMM(r.Centre[2])), func() { m.rw.jumpTo(r) })
		head.Alignment = widget.ButtonAlignLeading
		head.Importance = widget.LowImportance
		detail := widget.NewLabel(r.Detail)
		detail.Wrapping = fyne.TextWrapWord
		out = append(out, head, detail)
	}
	if small > 0 {
		plural := what + "s"
		if small == 1 {
			plural = what
		}
		lead := ""
		if len(out) > 0 {
			lead = "and "
		}
		out = append(out, widget.NewLabel(fmt.Sprintf("%s%d %s below %s mm³ (%s mL together)", lead, small, plural, fmtNum(minMM3), fmtML(smallML))))
	}
	return out
}

// fmtML prints a volume in mL with three decimals, never "-0.000".
func fmtML(v float64) string {
	s := fmt.Sprintf("%.3f", v)
	if s == "-0.000" {
		return "0.000"
	}
	return s
}

// fmtMM prints a coordinate in mm without a negative zero.
func fmtMM(v float64) string {
	s := fmt.Sprintf("%.0f", v)
	if s == "-0" {
		return "0"
	}
	return s
}

func sumML(rs []region) float64 {
	var s float64
	for _, r := range rs {
		s += r.VolumeML
	}
	return s
}

// jumpTo shows a region in both viewers: its slice, centred.
func (rw *reviewWindow) jumpTo(r region) {
	for n, v := range rw.viewers {
		v.centreOn(r.Centre)
		rw.sliceChanged(n)
	}
	rw.status.SetText(fmt.Sprintf("Showing %s (%.3f mL) at (%.1f, %.1f, %.1f) mm", r.Label, r.VolumeML, r.Centre[0], r.Centre[1], r.Centre[2]))
}

// washBar shows the dose colourwash scale: the colour bar of the reports
// (view.WashBar), floor to ceiling on a log scale, lethal level marked.
type washBar struct {
	content fyne.CanvasObject
	img     *canvas.Image
}

// washBarSize is the colour bar's size in pixels.
var washBarSize = fyne.NewSize(420, 64)

func newWashBar() *washBar {
	b := &washBar{img: canvas.NewImageFromImage(nil)}
	b.img.FillMode = canvas.ImageFillOriginal
	b.img.ScaleMode = canvas.ImageScalePixels
	b.img.SetMinSize(washBarSize)
	b.content = container.NewHBox(b.img)
	return b
}

// set shows the scale from floor to top in unit with threshold marked.
func (b *washBar) set(floor, top, threshold float64, unit string) {
	img, err := view.WashBar(view.DoseScale{Floor: floor, Ceiling: top, Opacity: 1}, threshold, unit, int(washBarSize.Width), int(washBarSize.Height))
	if err != nil {
		b.img.Image = nil
	} else {
		b.img.Image = img
	}
	b.img.Refresh()
}

// signOffText says whether the analysis on screen is signed off and lists
// the sign-offs of the open case (names hidden in teaching mode).
func (rw *reviewWindow) signOffText() string {
	if rw.record == nil || len(rw.record.SignOffs) == 0 {
		return "Not signed off."
	}
	r, _ := rw.resultRaw()
	st := review.SignOffFor(rw.record.SignOffs, rw.hash, rw.loaded.Study, r)
	b := []string{"This analysis: " + st.Line(rw.teaching) + "."}
	for _, s := range rw.record.SignOffs {
		who := s.Reviewer
		if rw.teaching {
			who = "a reviewer"
		}
		covered := "coverage not measurable"
		if p := s.Figures.CoveredMonitoredPct; p != nil {
			covered = fmt.Sprintf("%.1f %% of the monitored target covered", *p)
		}
		line := fmt.Sprintf("%s by %s: %s, %s", s.Time.Local().Format("2006-01-02 15:04"), who, s.Outcome, covered)
		if s.InputHash != rw.hash {
			line += " (different input files)"
		}
		if s.Comment != "" && !rw.teaching {
			line += "; comment: " + s.Comment
		}
		b = append(b, line)
	}
	return strings.Join(b, "\n")
}

func btoi(b bool) int {
	if b {
		return 1
	}
	return 0
}

// coveredText is the covered part of the monitored target as the figures
// panel shows it, saying which part it is of when not all of the target
// is monitored.
func coveredText(r *review.Result) string {
	t := review.PercentText(r.CoveredFraction)
	if r.CoveredFraction != nil && r.NotMonitoredFraction > 0 {
		t += " of the monitored target"
	}
	return t
}
