//go:build cgo

package main

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strings"
	"sync/atomic"

	"dosecover/dosemap"
	"dosecover/review"
	"dosecover/review/report"
	"dosecover/review/view"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"
)

// reviewWindow is the review window of one case at a time.
type reviewWindow struct {
	app fyne.App
	win fyne.Window

	// Case state; touched only on the UI goroutine.
	loaded     *loadedCase
	hash       string
	nFiles     int
	record     *reviewRecord
	settings   review.Settings
	sess       session
	result     *analysisResult
	selected   int // sonication row shown alone; -1 for the cumulative dose
	pinned     *dosemap.Vec3
	teaching   bool
	scene      sceneLayers
	opt        displayOptions
	jobCancel  context.CancelFunc
	jobGen     int
	pendingDir string       // the folder being opened
	follow     *followState // the session being followed; nil when none
	lastExport string       // path stem of the last report export
	fromRecord bool         // the open case's settings came from its review record
	// The sonication table's order: the column sorted by (1, the number,
	// at first), descending or not, and the result row of each table row
	// (nil: to be computed).
	sonSort    int
	sonDesc    bool
	sonOrder   []int
	probeGen   int
	probeCurve *review.Probe
	active     *sliceViewer

	// completed counts finished background jobs (loads and analyses, with
	// or without error); tests wait on it.
	completed atomic.Int64
	auxDone   atomic.Int64 // finished probe and peak-temperature computations
	exported  atomic.Int64 // finished report exports

	viewers   [2]*sliceViewer
	sliders   [2]*widget.Slider
	sliceInfo [2]*widget.Label
	planeSel  [2]*widget.Select

	title      *tipLabel
	identity   *tipLabel
	signState  *widget.Label // whether the analysis on screen is signed off
	hover      *widget.Label
	status     *tipLabel
	progress   *widget.ProgressBar
	cancelBtn  *widget.Button
	notice     *widget.Label // shown over the viewers when there is nothing to show
	teachCheck *widget.Check
	selInfo    *widget.Label
	// planeControls are the Planes check and the legend's measured-plane
	// entry, shown only for a case measured on planes of its own.
	planeControls []fyne.CanvasObject
	opacity       *widget.Slider
	floorEntry    *widget.Entry

	washBar  *washBar
	metrics  *metricsPanel
	sonTable *widget.Table
	probe    *plotView
	probeMsg *widget.Label
	loadInfo *widget.Label
	tips     *tipLayer // full text of cut labels on hover

	bottomTabs *container.AppTabs // sonications, pinned point, folder

	// The sonication table's last row, made taller so that it clears the
	// horizontal scroll bar (-1: none), and the height of the other rows.
	sonLast int
	sonRowH float32
}

// probeSplit is the share of the left column the images keep while the
// pinned point's plots are shown.
const probeSplit = 0.42

const (
	prefRecent   = "recent.v1"
	prefTeaching = "teaching"
	prefReviewer = "reviewer"
	prefOpacity  = "opacity"
)

func newReviewWindow(a fyne.App) *reviewWindow {
	rw := &reviewWindow{app: a, selected: -1, sonSort: 1}
	rw.win = a.NewWindow("dosecover")
	rw.settings = loadPrefSettings(a.Preferences())
	rw.teaching = a.Preferences().Bool(prefTeaching)
	rw.opt = displayOptions{WindowCentre: 500, WindowWidth: 1000, Opacity: a.Preferences().FloatWithFallback(prefOpacity, 0.55),
		ShowDose: true, ShowContours: true, ShowHoles: true, ShowPlanes: true}
	rw.build()
	rw.win.SetMainMenu(rw.mainMenu())
	rw.win.SetOnDropped(rw.dropped)
	rw.win.Canvas().SetOnTypedKey(rw.typedKey)
	for _, sc := range []struct {
		key fyne.KeyName
		fn  func()
	}{{fyne.KeyO, rw.chooseFolder}, {fyne.KeyE, rw.exportReport}, {fyne.KeyComma, rw.openSettings}, {fyne.KeyT, func() { rw.teachCheck.SetChecked(!rw.teaching) }}} {
		fn := sc.fn
		rw.win.Canvas().AddShortcut(ctrlKey(sc.key), func(fyne.Shortcut) { fn() })
	}
	rw.win.Canvas().SetOnTypedRune(func(r rune) {
		if rw.active != nil {
			rw.active.TypedRune(r)
		}
	})
	rw.updateTitle()
	return rw
}

func (rw *reviewWindow) build() {
	rw.tips = newTipLayer()
	rw.title = newTipLabel(rw.tips)
	rw.title.TextStyle.Bold = true
	rw.title.SetText("No case open")
	rw.identity = newTipLabel(rw.tips)
	rw.signState = widget.NewLabelWithStyle("", fyne.TextAlignTrailing, fyne.TextStyle{Bold: true})
	rw.hover = widget.NewLabel("Hover over an image to read position, anatomy, temperature and dose.")
	rw.hover.Truncation = fyne.TextTruncateEllipsis
	rw.status = newTipLabel(rw.tips) // cut where it does not fit, its full text on hover
	rw.progress = widget.NewProgressBar()
	rw.progress.Hide()
	rw.cancelBtn = widget.NewButtonWithIcon("Cancel", theme.CancelIcon(), rw.cancelJob)
	rw.cancelBtn.Hide()
	rw.notice = widget.NewLabel("")
	rw.notice.Wrapping = fyne.TextWrapWord
	rw.notice.Alignment = fyne.TextAlignCenter

	for n, kind := range []planeKind{planeAcquisition, planeReformatRow} {
		n := n
		v := newSliceViewer(kind, &rw.opt)
		rw.viewers[n] = v
		rw.sliceInfo[n] = widget.NewLabel("")
		s := widget.NewSlider(0, 1)
		s.Step = 1
		s.OnChanged = func(f float64) { v.setSlice(int(f)) }
		rw.sliders[n] = s
		v.onSlice = func(k int) { rw.sliceChanged(n) }
		v.onHover = rw.hovered
		v.onPin = rw.pin
		v.onWindow = rw.redraw
		v.onFocus = func(v *sliceViewer) { rw.active = v }
		v.refShown = func() *review.Rect { return rw.settings.Thermometry.DriftReference }
		v.onRef = rw.refDrawn
		sel := widget.NewSelect([]string{planeAcquisition.String(), planeReformatRow.String(), planeReformatCol.String()}, nil)
		sel.SetSelectedIndex(int(kind))
		sel.OnChanged = func(string) { v.setKind(planeKind(sel.SelectedIndex())) }
		rw.planeSel[n] = sel
	}
	rw.active = rw.viewers[0]

	viewPane := func(n int) fyne.CanvasObject {
		v := rw.viewers[n]
		zoomIn := widget.NewButtonWithIcon("", theme.ZoomInIcon(), func() { v.zoomBy(1.25) })
		zoomOut := widget.NewButtonWithIcon("", theme.ZoomOutIcon(), func() { v.zoomBy(0.8) })
		zoomFit := widget.NewButtonWithIcon("", theme.ZoomFitIcon(), v.resetView)
		head := container.NewHBox(container.NewGridWrap(fyne.NewSize(210, 36), rw.planeSel[n]), zoomOut, zoomIn, zoomFit)
		foot := container.NewBorder(nil, nil, nil, container.NewGridWrap(fyne.NewSize(118, 36), rw.sliceInfo[n]), rw.sliders[n])
		return container.NewBorder(head, foot, nil, nil, v)
	}
	views := container.NewStack(container.NewGridWithColumns(2, viewPane(0), viewPane(1)),
		container.NewCenter(container.NewGridWrap(fyne.NewSize(560, 110), rw.notice)))

	rw.washBar = newWashBar()
	rw.opacity = widget.NewSlider(0, 1)
	rw.opacity.Step = 0.05
	rw.opacity.Value = rw.opt.Opacity
	rw.opacity.OnChanged = func(f float64) {
		rw.opt.Opacity = f
		rw.app.Preferences().SetFloat(prefOpacity, f)
		rw.redraw()
	}
	rw.floorEntry = widget.NewEntry()
	rw.floorEntry.SetPlaceHolder("auto")
	rw.floorEntry.OnSubmitted = func(string) { rw.applyFloor() }
	rw.floorEntry.OnChanged = func(string) { rw.applyFloor() }
	showDose := widget.NewCheck("Dose", func(b bool) { rw.opt.ShowDose = b; rw.redraw() })
	showDose.SetChecked(true)
	showCont := widget.NewCheck("Contours", func(b bool) { rw.opt.ShowContours = b; rw.redraw() })
	showCont.SetChecked(true)
	showHoles := widget.NewCheck("Holes & spill", func(b bool) { rw.opt.ShowHoles = b; rw.redraw() })
	showHoles.SetChecked(true)
	showPlanes := widget.NewCheck("Planes", func(b bool) { rw.opt.ShowPlanes = b; rw.redraw() })
	showPlanes.SetChecked(true)
	showPlanes.Hide()
	resetWL := widget.NewButton("Reset window", rw.resetWindow)

	rw.selInfo = widget.NewLabel("Showing the cumulative dose")
	cumul := widget.NewButton("Cumulative", func() { rw.selectSonication(-1) })
	// The display controls and the colour bar, then the legend: rows that
	// wrap where the column is narrow instead of widening the window.
	display := container.New(newFlowLayout(),
		container.NewHBox(widget.NewLabel("Opacity"), container.NewGridWrap(fyne.NewSize(110, 36), rw.opacity)),
		container.NewHBox(widget.NewLabel("Floor"), container.NewGridWrap(fyne.NewSize(76, 36), rw.floorEntry)),
		showDose, showCont, showHoles, showPlanes, resetWL,
		rw.washBar.content,
	)
	legend, planeEntry := legendRow()
	rw.planeControls = []fyne.CanvasObject{showPlanes, planeEntry}

	rw.sonTable = rw.newSonicationTable()
	rw.probe = newPlotView()
	rw.probeMsg = widget.NewLabel("Click a point on an image to pin it and plot its temperature over the session.")
	rw.probeMsg.Wrapping = fyne.TextWrapWord
	rw.loadInfo = widget.NewLabel("")
	rw.loadInfo.Wrapping = fyne.TextWrapWord
	rw.loadInfo.TextStyle.Monospace = true
	bottom := container.NewAppTabs(
		container.NewTabItem("Sonications", container.NewBorder(
			container.NewBorder(nil, nil, container.NewHBox(rw.selInfo, cumul), nil,
				tipText(rw.tips, "· untick a sonication to re-analyse without it; select a row to show its dose alone")),
			nil, nil, nil, rw.sonTable)),
		container.NewTabItem("Pinned point", container.NewBorder(rw.probeMsg, nil, nil, nil, rw.probe.raster)),
		container.NewTabItem("Folder and skipped files", container.NewVScroll(rw.loadInfo)),
	)
	left := container.NewVSplit(
		container.NewBorder(nil, container.NewVBox(display, legend), nil, nil, views),
		bottom)
	left.SetOffset(0.68)
	// The pinned point's plots (temperature above, dose below) get half
	// the column while their tab is open; the other tabs give the room
	// back to the images.
	pinTab := bottom.Items[1]
	restore := -1.0
	bottom.OnSelected = func(it *container.TabItem) {
		switch {
		case it == pinTab && left.Offset > probeSplit:
			restore = left.Offset
			left.SetOffset(probeSplit)
		case it != pinTab && restore >= 0:
			left.SetOffset(restore)
			restore = -1
		}
	}
	rw.bottomTabs = bottom

	rw.metrics = newMetricsPanel(rw)
	main := container.NewHSplit(left, rw.metrics.content)
	main.SetOffset(0.70)

	rw.teachCheck = widget.NewCheck("Teaching mode (hide identity)", rw.setTeaching)
	rw.teachCheck.SetChecked(rw.teaching)
	toolbar := container.NewHBox(
		widget.NewButtonWithIcon("Open folder…", theme.FolderOpenIcon(), rw.chooseFolder),
		widget.NewButtonWithIcon("Recent", theme.HistoryIcon(), rw.showRecentMenu),
		widget.NewButtonWithIcon("Settings…", theme.SettingsIcon(), rw.openSettings),
		widget.NewButtonWithIcon("Sign off…", theme.ConfirmIcon(), rw.signOff),
		widget.NewButtonWithIcon("Export report…", theme.DocumentSaveIcon(), rw.exportReport),
		rw.teachCheck,
	)
	header := container.NewBorder(nil, nil, toolbar,
		container.NewHBox(widget.NewButtonWithIcon("", theme.HelpIcon(), rw.showShortcuts),
			widget.NewButtonWithIcon("", theme.InfoIcon(), rw.showAbout)),
		container.NewBorder(nil, nil, widget.NewSeparator(), rw.signState, container.New(headerLayout{}, rw.title, rw.identity)))
	statusBar := container.NewBorder(nil, nil, nil,
		container.NewHBox(container.NewGridWrap(fyne.NewSize(200, 30), rw.progress), rw.cancelBtn),
		container.NewGridWithColumns(2, rw.hover, rw.status))
	rw.win.SetContent(container.NewStack(container.NewBorder(header, statusBar, nil, nil, main), rw.tips.layer))
	rw.showNotice("Open a case folder (File ▸ Open folder…, or drop a folder on this window).")
}

// legendRow explains the overlay colours and line styles.
// legendRow returns the legend of the overlays and, apart, its
// measured-plane entry (hidden until a case has planes of its own).
func legendRow() (legend, planeEntry fyne.CanvasObject) {
	items := []fyne.CanvasObject{}
	for _, l := range overlayLegend {
		it := container.NewHBox(legendSwatch(l.style, l.c), widget.NewLabel(l.name))
		if l.c == view.ColorPlane {
			planeEntry = it
			it.Hide()
		}
		items = append(items, it)
	}
	return container.New(newFlowLayout(), items...), planeEntry
}

// ctrlKey is the shortcut of key with Ctrl (Cmd on macOS).
func ctrlKey(key fyne.KeyName) *desktop.CustomShortcut {
	return &desktop.CustomShortcut{KeyName: key, Modifier: fyne.KeyModifierShortcutDefault}
}

// withShortcut shows the window's keyboard shortcut beside a menu item.
func withShortcut(it *fyne.MenuItem, key fyne.KeyName) *fyne.MenuItem {
	it.Shortcut = ctrlKey(key)
	return it
}

func (rw *reviewWindow) mainMenu() *fyne.MainMenu {
	recent := fyne.NewMenuItem("Recent cases", nil)
	recent.ChildMenu = fyne.NewMenu("")
	file := fyne.NewMenu("File",
		withShortcut(fyne.NewMenuItem("Open folder…", rw.chooseFolder), fyne.KeyO),
		fyne.NewMenuItem("Open the demo case", func() { rw.openDemo() }),
		fyne.NewMenuItem("Open from archive…", rw.openFromArchive),
		recent,
		fyne.NewMenuItem("Follow folder…", rw.chooseFollowFolder),
		fyne.NewMenuItem("Follow archive study…", rw.chooseFollowArchive),
		fyne.NewMenuItem("Stop following", func() { rw.stopFollowing(true) }),
		fyne.NewMenuItemSeparator(), fyne.NewMenuItem("Audit many cases…", rw.openAuditView),
	)
	rw.fillRecentMenu(recent.ChildMenu)
	review := fyne.NewMenu("Review",
		withShortcut(fyne.NewMenuItem("Analysis settings…", rw.openSettings), fyne.KeyComma),
		fyne.NewMenuItem("Draw drift reference on the left image", rw.startRefMode),
		fyne.NewMenuItem("Automatic drift reference", rw.automaticRef),
		fyne.NewMenuItem("Sign off…", rw.signOff),
		withShortcut(fyne.NewMenuItem("Export report…", rw.exportReport), fyne.KeyE),
		fyne.NewMenuItem("Store results in archive…", rw.storeResults),
	)
	help := fyne.NewMenu("Help",
		fyne.NewMenuItem("Keyboard and mouse", rw.showShortcuts),
		fyne.NewMenuItem("About dosecover", rw.showAbout),
	)
	return fyne.NewMainMenu(file, review, help)
}

// showNotice shows text over the viewers; empty hides it.
func (rw *reviewWindow) showNotice(text string) {
	rw.notice.SetText(text)
	if text == "" {
		rw.notice.Hide()
	} else {
		rw.notice.Show()
	}
}

// updateTitle sets the window title and the case header. In teaching mode
// no identifying attribute appears anywhere.
func (rw *reviewWindow) updateTitle() {
	name := rw.caseName()
	if name == "" {
		rw.win.SetTitle("dosecover " + version)
		rw.title.SetText("No case open")
		rw.identity.SetText("")
		return
	}
	rw.win.SetTitle(name + " — dosecover " + version)
	rw.title.SetText(name)
	id := ""
	if !rw.teaching && rw.loaded != nil && rw.loaded.Case != nil {
		p := rw.loaded.Case.Patient
		var parts []string
		for _, f := range []struct{ k, v string }{{"", p.Name}, {"ID ", p.ID}, {"born ", p.BirthDate}, {"study ", p.StudyDate}, {"", p.Institution}} {
			if f.v != "" {
				parts = append(parts, f.k+f.v)
			}
		}
		id = strings.Join(parts, " · ")
	} else if rw.teaching {
		id = "teaching mode: identity hidden"
	}
	rw.identity.SetText(id)
}

// caseName is the display name of the open case: in teaching mode a
// neutral name made from the input hash.
func (rw *reviewWindow) caseName() string {
	if rw.loaded == nil {
		return ""
	}
	if rw.teaching {
		// The neutral label the exported reports carry, so window and
		// report name the case alike.
		label := ""
		if rw.loaded.Case != nil {
			label = rw.loaded.Case.Label
		}
		return report.DeidentifiedLabel(label, rw.hash)
	}
	if rw.loaded.Case != nil && rw.loaded.Case.Label != "" {
		return rw.loaded.Case.Label
	}
	return filepath.Base(rw.loaded.Dir)
}

func (rw *reviewWindow) setTeaching(on bool) {
	rw.teaching = on
	rw.app.Preferences().SetBool(prefTeaching, on)
	rw.updateTitle()
	rw.showLoadInfo()
	rw.metrics.update()
	rw.refreshSonTable()
	rw.win.SetMainMenu(rw.mainMenu())
}

// displayPath returns p for display. In teaching mode folder names could
// reveal identity: paths inside the open case folder are shown relative to
// it and any other path as "the case folder" or its last element only.
func (rw *reviewWindow) displayPath(p string) string {
	if !rw.teaching {
		return p
	}
	if rw.loaded != nil {
		if rel, err := filepath.Rel(rw.loaded.Dir, p); err == nil && !strings.HasPrefix(rel, "..") {
			if rel == "." {
				return "the case folder"
			}
			return rel
		}
	}
	if rw.pendingDir != "" && filepath.Clean(p) == rw.pendingDir {
		return "the case folder"
	}
	return filepath.Base(p)
}

// scrub removes the case folder's path from a message in teaching mode.
func (rw *reviewWindow) scrub(msg string) string {
	if !rw.teaching {
		return msg
	}
	for _, d := range []string{rw.pendingDir, func() string {
		if rw.loaded != nil {
			return rw.loaded.Dir
		}
		return ""
	}()} {
		if d != "" {
			msg = strings.ReplaceAll(msg, d, "<case folder>")
		}
	}
	return msg
}

// redraw repaints both viewers.
func (rw *reviewWindow) redraw() {
	for _, v := range rw.viewers {
		v.raster.Refresh()
	}
}

func (rw *reviewWindow) sliceChanged(n int) {
	v := rw.viewers[n]
	total := v.slices()
	s := rw.sliders[n]
	s.Max = math.Max(1, float64(total-1))
	s.Value = float64(v.slice)
	s.Refresh()
	if total > 0 {
		rw.sliceInfo[n].SetText(fmt.Sprintf("slice %d / %d", v.slice+1, total))
	} else {
		rw.sliceInfo[n].SetText("")
	}
}

func (rw *reviewWindow) typedKey(ev *fyne.KeyEvent) {
	if ev.Name == fyne.KeyEscape && escapeDialog(rw.win) {
		return
	}
	if ev.Name == fyne.KeyEscape && rw.viewers[0].refMode {
		rw.viewers[0].refMode = false
		rw.viewers[0].refA, rw.viewers[0].refB = nil, nil
		rw.redraw()
		rw.status.SetText("Drawing the drift reference was cancelled.")
		return
	}
	if rw.active != nil {
		rw.active.TypedKey(ev)
	}
}

func (rw *reviewWindow) resetWindow() {
	if rw.loaded == nil || rw.loaded.Case == nil {
		return
	}
	rw.opt.WindowCentre, rw.opt.WindowWidth = defaultWindow(rw.loaded.Case)
	rw.redraw()
}

func (rw *reviewWindow) applyFloor() {
	if rw.result == nil {
		return
	}
	var f float64
	if err := parseFloatField("floor", rw.floorEntry.Text, &f); err != nil || f <= 0 {
		f = defaultFloor(rw.result.Threshold)
	}
	if top := washTop(rw.result.Threshold); f >= top/2 {
		f = top / 2
	}
	rw.opt.Floor = f
	rw.washBar.set(f, washTop(rw.result.Threshold), rw.result.Threshold, rw.result.Unit)
	rw.redraw()
}

// defaultFloor is the dose below which the wash is transparent: a
// hundredth of the threshold.
func defaultFloor(threshold float64) float64 { return view.WashScale(threshold).Floor }

// defaultWindow returns the display window of the anatomy: the files'
// window tags, else the 1st–99th percentile of the voxel values.
func defaultWindow(c *dosemap.Case) (centre, width float64) {
	if c.WindowWidth > 0 {
		return c.WindowCenter, c.WindowWidth
	}
	if c.Anatomy == nil || len(c.Anatomy.Data) == 0 {
		return 500, 1000
	}
	step := max(1, len(c.Anatomy.Data)/200000)
	var vals []float64
	for n := 0; n < len(c.Anatomy.Data); n += step {
		if v := c.Anatomy.Data[n]; v == v {
			vals = append(vals, float64(v))
		}
	}
	if len(vals) == 0 {
		return 500, 1000
	}
	sort.Float64s(vals)
	lo, hi := vals[len(vals)/100], vals[len(vals)*99/100]
	if hi <= lo {
		hi = lo + 1
	}
	return (lo + hi) / 2, hi - lo
}

// hovered shows the values under the pointer.
func (rw *reviewWindow) hovered(p dosemap.Vec3, inside bool) {
	if !inside || rw.loaded == nil {
		rw.hover.SetText("")
		return
	}
	rw.hover.SetText(rw.describePoint(p))
}

// describePoint returns position, anatomy value, peak temperature and dose
// at p.
func (rw *reviewWindow) describePoint(p dosemap.Vec3) string {
	s := fmt.Sprintf("(%.1f, %.1f, %.1f) mm", p[0], p[1], p[2])
	c := rw.loaded.Case
	if c != nil && c.Anatomy != nil {
		if v := c.Anatomy.Sample(p); v == v {
			s += fmt.Sprintf(" · anatomy %.0f", v)
		}
	}
	if r := rw.result; r != nil {
		if r.PeakTemp != nil {
			if v := r.PeakTemp.Sample(p); v == v {
				s += fmt.Sprintf(" · peak %.1f °C", v)
			} else {
				s += " · temperature not monitored"
			}
		}
		if rw.scene.Dose != nil {
			if v := rw.scene.Dose.Sample(p); v == v {
				s += fmt.Sprintf(" · dose %s %s", fmtDose(float64(v)), r.Unit)
			}
		}
	}
	return s
}

// fmtDose prints a dose with sensible precision over many decades.
// It is the format of the colour bar and the legends (view.FormatDose).
func fmtDose(d float64) string { return view.FormatDose(d) }

// setBusy shows the progress bar and the cancel button while a job runs.
func (rw *reviewWindow) setBusy(text string, frac float64) {
	rw.status.SetText(text)
	if frac < 0 {
		rw.progress.Hide()
		rw.cancelBtn.Hide()
		return
	}
	rw.progress.SetValue(frac)
	rw.progress.Show()
	rw.cancelBtn.Show()
}

func (rw *reviewWindow) cancelJob() {
	if rw.jobCancel != nil {
		rw.jobCancel()
		rw.jobCancel = nil
	}
}

// startJob cancels any running job and returns the context and generation
// of a new one.
func (rw *reviewWindow) startJob() (context.Context, int) {
	rw.cancelJob()
	ctx, cancel := context.WithCancel(context.Background())
	rw.jobCancel = cancel
	rw.jobGen++
	return ctx, rw.jobGen
}

// finishJob ends job gen; it reports false for a superseded job, whose
// result must be dropped.
// The caller counts the job in completed when its callback is done.
func (rw *reviewWindow) finishJob(gen int) bool {
	if gen != rw.jobGen {
		return false
	}
	rw.jobCancel = nil
	return true
}

func (rw *reviewWindow) showError(title string, err error) {
	msg := rw.scrub(err.Error())
	rw.setBusy(rw.scrub(title)+": "+msg, -1)
	showDialog(rw.win, dialog.NewError(fmt.Errorf("%s\n\n%s", rw.scrub(title), msg), rw.win))
}

// startRefMode lets the user drag the drift reference rectangle on the
// acquisition view (the left image).
func (rw *reviewWindow) startRefMode() {
	if rw.loaded == nil {
		return
	}
	v := rw.viewers[0]
	v.refMode = true
	rw.status.SetText("Drag a rectangle on the left image over unheated tissue: the drift is measured there on every slice. Esc cancels.")
}

// automaticRef returns to the automatically chosen drift reference.
func (rw *reviewWindow) automaticRef() {
	rw.viewers[0].refMode = false
	if rw.settings.Thermometry.DriftReference == nil {
		return
	}
	rw.settings.Thermometry.DriftReference = nil
	rw.redraw()
	rw.runAnalysis(true)
}

// refDrawn takes a drawn rectangle as the drift reference and recomputes
// the temperatures.
func (rw *reviewWindow) refDrawn(a, b, u, v dosemap.Vec3) {
	rw.viewers[0].refMode = false
	r := review.NewRect(a, b, u, v)
	if r.W < 1 || r.H < 1 {
		rw.status.SetText("The rectangle was too small; the drift reference is unchanged.")
		return
	}
	if rw.loaded != nil && rw.loaded.Case != nil {
		t := rw.settings.Thermometry
		t.DriftReference = r
		for _, so := range rw.loaded.Case.Sonications {
			if _, err := t.Options(so.Geometry); err != nil {
				rw.showError("The drift reference was not changed", fmt.Errorf("sonication %d: %w", so.Number, err))
				return
			}
		}
	}
	rw.settings.Thermometry.DriftReference = r
	rw.redraw()
	rw.runAnalysis(true)
}
