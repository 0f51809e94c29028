//go:build cgo

package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"net/url"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"dosecover/review"
	"dosecover/review/audit"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/storage"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"
)

// The audit window: choose folders, run the batch audit of package
// review/audit in the background, follow its progress, read the table of
// cases and open one of them in the review window.

// newAuditAnalyzer builds the per-case analysis of an audit run from the
// GUI: the same analysis and reports as `dosecover audit`.
var newAuditAnalyzer = func(s review.Settings) audit.Analyzer {
	return audit.NewAnalyzer(s, audit.ReportArtifacts)
}

// uiDo runs f on the UI goroutine; every update of the audit window from
// a background goroutine goes through it.
var uiDo = fyne.Do

// prefAuditInputs prefixes the preference that remembers which input
// folders an audit (by its output folder) read, so that a case of an
// earlier audit can be opened again.
const prefAuditInputs = "audit.inputs:"

// settingsSource chooses where the settings of an audit come from.
const (
	settingsFromWindow = "Settings of the review window"
	settingsFromFile   = "Settings file (JSON)"
)

// auditView is the audit window.
type auditView struct {
	app      fyne.App
	win      fyne.Window
	openCase func(dir string) // opens a case folder in the review window
	// hideIdentity, when set, is called before a case of a de-identified
	// audit is opened (the review window turns teaching mode on).
	hideIdentity func()
	current      func() (s review.Settings, describe string, note string) // settings of the review window

	inputs     []string
	inputList  *widget.List
	inputEntry *widget.Entry
	noInput    *widget.Label
	inputSel   int
	outEntry   *widget.Entry
	workers    *widget.Entry
	resume     *widget.Check
	deid       *widget.Check
	source     *widget.RadioGroup
	fileEntry  *widget.Entry
	settInfo   *widget.Label

	runBtn    *widget.Button
	cancelBtn *widget.Button
	progress  *widget.ProgressBar
	searching *widget.ProgressBarInfinite // shown while the engine looks for cases
	counts    *widget.Label
	message   *widget.Label

	table    *widget.Table
	tips     *tipLayer   // full text of the column headers on hover
	rows     []audit.Row // as shown, in display order
	sortCol  int         // -1: by case name as the engine returns them
	sortDesc bool
	selected int // index into rows; -1 none
	selInfo  *widget.Label
	noRows   *widget.Label
	openBtn  *widget.Button
	repBtn   *widget.Button

	// Run state; touched on the UI goroutine only.
	cancel  context.CancelFunc
	running bool
	gen     int
	outDir  string // output folder of the rows shown

	// sources maps the case IDs analysed by the last run to their source
	// folders.
	mu      sync.Mutex
	sources map[string]string

	finished atomic.Int64 // completed runs and loads (tests wait on it)
}

// auditWindows keeps one audit window per review window.
var auditWindows = map[*reviewWindow]*auditView{}

// openAuditView shows the audit window of rw, creating it on first use.
func (rw *reviewWindow) openAuditView() {
	if av := auditWindows[rw]; av != nil {
		av.describeSettings()
		av.win.Show()
		av.win.RequestFocus()
		return
	}
	av := newAuditView(rw.app, func(dir string) {
		rw.openCase(dir)
		rw.win.RequestFocus()
	}, func() (review.Settings, string, string) {
		return windowAuditSettings(rw.settings)
	})
	auditWindows[rw] = av
	av.hideIdentity = func() { rw.teachCheck.SetChecked(true) }
	av.win.SetOnClosed(func() {
		av.stop()
		delete(auditWindows, rw)
	})
	av.win.Show()
}

// windowAuditSettings turns the review window's settings into audit
// settings with a description and a note on what is not carried over.
func windowAuditSettings(s review.Settings) (review.Settings, string, string) {
	var notes []string
	if len(s.Excluded) > 0 {
		notes = append(notes, "sonications left out of the open case are not left out of the audit")
		s.Excluded = nil
	}
	if t := s.Thermometry; t.B0T > 0 || t.TEms > 0 || t.PhaseScale > 0 {
		notes = append(notes, fmt.Sprintf("the B0, TE and phase scale entered in the review window (B0 %g T, TE %g ms, phase scale %g rad; 0 = from the files) apply to every case", t.B0T, t.TEms, t.PhaseScale))
	}
	if s.Thermometry.DriftReference != nil {
		notes = append(notes, "the drift reference region drawn on the open case is not used: each case gets its automatic reference region")
		s.Thermometry.DriftReference = nil
	}
	return s, s.Describe(), strings.Join(notes, "; ")
}

// newAuditView builds the audit window. openCase opens a case folder in
// the review window; current returns the review window's settings.
func newAuditView(a fyne.App, openCase func(dir string), current func() (review.Settings, string, string)) *auditView {
	av := &auditView{app: a, openCase: openCase, current: current, sortCol: -1, selected: -1, inputSel: -1, sources: map[string]string{}}
	av.win = a.NewWindow("Audit many cases — dosecover " + version)
	av.build()
	av.win.Resize(fyne.NewSize(1560, 900))
	return av
}

func (av *auditView) build() {
	av.inputList = widget.NewList(
		func() int { return len(av.inputs) },
		func() fyne.CanvasObject {
			l := widget.NewLabel("")
			l.Truncation = fyne.TextTruncateEllipsis
			return l
		},
		func(id widget.ListItemID, o fyne.CanvasObject) {
			if id < len(av.inputs) {
				o.(*widget.Label).SetText(av.inputs[id])
			}
		})
	av.inputList.OnSelected = func(id widget.ListItemID) { av.inputSel = id }
	av.inputList.OnUnselected = func(widget.ListItemID) { av.inputSel = -1 }
	addBtn := widget.NewButtonWithIcon("Add folder…", theme.ContentAddIcon(), av.chooseInput)
	removeBtn := widget.NewButtonWithIcon("Remove", theme.ContentRemoveIcon(), func() {
		if av.inputSel >= 0 && av.inputSel < len(av.inputs) {
			av.removeInput(av.inputSel)
		}
	})
	av.inputEntry = widget.NewEntry()
	av.inputEntry.SetPlaceHolder("type or paste a folder path and press Enter, use Add folder…, or drop folders on this window")
	av.inputEntry.OnSubmitted = av.typedInput
	av.noInput = widget.NewLabel("No input folder yet. A folder holding DICOM files is one case; otherwise each of its subfolders holding DICOM files is one.")
	av.noInput.Importance = widget.LowImportance
	av.noInput.Wrapping = fyne.TextWrapWord
	listBack := canvas.NewRectangle(theme.Color(theme.ColorNameInputBackground))
	listBack.CornerRadius = theme.InputRadiusSize()
	listBack.SetMinSize(fyne.NewSize(400, 104))
	inputs := container.NewBorder(av.inputEntry, nil, nil, container.NewVBox(addBtn, removeBtn),
		container.NewStack(listBack, av.inputList, av.noInput))

	av.outEntry = widget.NewEntry()
	av.outEntry.SetPlaceHolder("folder for the results (created when missing; not inside an input folder)")
	outBtn := widget.NewButtonWithIcon("Choose…", theme.FolderOpenIcon(), av.chooseOutput)
	out := container.NewBorder(nil, nil, nil, outBtn, av.outEntry)

	av.fileEntry = widget.NewEntry()
	av.fileEntry.SetPlaceHolder("settings JSON file (keys threshold, margin_mm, model, trials, seed)")
	av.fileEntry.OnChanged = func(string) { av.describeSettings() }
	fileBtn := widget.NewButtonWithIcon("Choose…", theme.FileIcon(), av.chooseSettingsFile)
	av.settInfo = widget.NewLabel("")
	av.settInfo.Wrapping = fyne.TextWrapWord
	av.source = widget.NewRadioGroup([]string{settingsFromWindow, settingsFromFile}, func(string) { av.describeSettings() })
	av.source.Horizontal = true
	av.source.Required = true
	av.source.SetSelected(settingsFromWindow)
	settings := container.NewVBox(
		container.NewBorder(nil, nil, av.source, fileBtn, av.fileEntry),
		av.settInfo)

	av.workers = widget.NewEntry()
	av.workers.SetText(strconv.Itoa(runtime.NumCPU()))
	av.resume = widget.NewCheck("Resume: skip cases already analysed in the output folder with the same inputs and settings", nil)
	av.deid = widget.NewCheck("De-identify: pseudonyms instead of folder names, no patient identity in any output", nil)
	options := container.NewVBox(
		container.NewHBox(widget.NewLabel("Workers"), container.NewGridWrap(fyne.NewSize(80, 36), av.workers),
			widget.NewLabel(fmt.Sprintf("cases at once (one per core: %d); each holds one case in memory", runtime.NumCPU()))),
		av.resume, av.deid)

	form := widget.NewForm(
		widget.NewFormItem("Input folders", inputs),
		widget.NewFormItem("Output folder", out),
		widget.NewFormItem("Settings", settings),
		widget.NewFormItem("Options", options),
	)

	av.runBtn = widget.NewButtonWithIcon("Run audit", theme.MediaPlayIcon(), av.start)
	av.runBtn.Importance = widget.HighImportance
	av.cancelBtn = widget.NewButtonWithIcon("Cancel", theme.CancelIcon(), av.stop)
	av.cancelBtn.Disable()
	av.progress = widget.NewProgressBar()
	av.searching = widget.NewProgressBarInfinite()
	av.searching.Hide()
	av.counts = widget.NewLabel("Not started.")
	av.message = widget.NewLabel("")
	av.message.Wrapping = fyne.TextWrapWord
	av.message.Hide()
	runRow := container.NewBorder(nil, nil, container.NewHBox(av.runBtn, av.cancelBtn),
		nil, container.NewBorder(nil, nil, container.NewGridWrap(fyne.NewSize(260, 36), container.NewStack(av.progress, av.searching)), nil, av.counts))

	av.tips = newTipLayer()
	av.table = av.newTable()
	av.selInfo = widget.NewLabel("Select a case; double-click or “Open case” shows it in the review window.")
	av.openBtn = widget.NewButtonWithIcon("Open case", theme.FolderOpenIcon(), av.openSelected)
	av.openBtn.Disable()
	av.repBtn = widget.NewButtonWithIcon("Open report", theme.DocumentIcon(), av.openReport)
	av.repBtn.Disable()
	actions := container.NewBorder(nil, nil,
		container.NewHBox(av.openBtn, av.repBtn,
			widget.NewButtonWithIcon("Open folder of results", theme.FolderIcon(), av.openResults),
			widget.NewButtonWithIcon("Open an existing audit…", theme.HistoryIcon(), av.chooseExisting)),
		nil, av.selInfo)
	caution := widget.NewLabel(strings.ReplaceAll(cautionText, "\n", " "))
	caution.Wrapping = fyne.TextWrapWord
	caution.Importance = widget.WarningImportance

	av.noRows = widget.NewLabel("No cases yet: choose the folders and press Run audit, or open an existing audit.")
	av.noRows.Importance = widget.LowImportance
	// The form scrolls above a divider the user can drag up to give the
	// table more room.
	results := container.NewBorder(container.NewVBox(runRow, av.message, widget.NewSeparator()), actions, nil, nil,
		container.NewStack(av.table, container.NewCenter(av.noRows)))
	split := container.NewVSplit(container.NewVScroll(form), results)
	split.SetOffset(0.48)
	av.win.SetContent(container.NewStack(container.NewBorder(nil, caution, nil, nil, split), av.tips.layer))
	av.win.SetOnDropped(av.dropped)
	av.win.Canvas().SetOnTypedKey(func(ev *fyne.KeyEvent) {
		if ev.Name == fyne.KeyEscape {
			escapeDialog(av.win)
		}
	})
	av.describeSettings()
}

// addInput adds a folder to the input list (once).
func (av *auditView) addInput(dir string) {
	dir = filepath.Clean(dir)
	for _, d := range av.inputs {
		if d == dir {
			return
		}
	}
	av.inputs = append(av.inputs, dir)
	av.noInput.Hide()
	av.inputList.Refresh()
}

// typedInput adds the folder typed into the path entry.
func (av *auditView) typedInput(text string) {
	p := strings.TrimSpace(text)
	if p == "" {
		return
	}
	fi, err := os.Stat(p)
	switch {
	case err != nil:
		av.showMessage("Input folder "+p+": "+err.Error(), true)
		return
	case !fi.IsDir():
		av.showMessage("Input "+p+" is not a folder.", true)
		return
	}
	av.showMessage("", false)
	av.addInput(p)
	av.inputEntry.SetText("")
}

// dropped adds folders dropped on the window as input folders.
func (av *auditView) dropped(_ fyne.Position, items []fyne.URI) {
	for _, u := range items {
		if u.Scheme() != "file" {
			continue
		}
		if fi, err := os.Stat(u.Path()); err == nil && fi.IsDir() {
			av.addInput(u.Path())
		}
	}
}

func (av *auditView) removeInput(n int) {
	av.inputs = append(av.inputs[:n], av.inputs[n+1:]...)
	av.inputList.UnselectAll()
	av.inputSel = -1
	if len(av.inputs) == 0 {
		av.noInput.Show()
	}
	av.inputList.Refresh()
}

// startDir returns where the folder dialogs start: next to the output
// folder, else next to the last input folder; "" when neither exists.
func (av *auditView) startDir() string {
	var cands []string
	if out := strings.TrimSpace(av.outEntry.Text); out != "" {
		cands = append(cands, filepath.Dir(filepath.Clean(out)))
	}
	if n := len(av.inputs); n > 0 {
		cands = append(cands, filepath.Dir(av.inputs[n-1]))
	}
	for _, c := range cands {
		if fi, err := os.Stat(c); err == nil && fi.IsDir() {
			return c
		}
	}
	return ""
}

// folderDialog asks for a folder and calls fn with its path.
func (av *auditView) folderDialog(fn func(string)) {
	d := dialog.NewFolderOpen(func(u fyne.ListableURI, err error) {
		if err != nil {
			showDialog(av.win, dialog.NewError(err, av.win))
			return
		}
		if u != nil {
			fn(u.Path())
		}
	}, av.win)
	if dir := av.startDir(); dir != "" {
		if l, err := storage.ListerForURI(storage.NewFileURI(dir)); err == nil {
			d.SetLocation(l)
		}
	}
	d.Resize(fyne.NewSize(800, 560))
	d.Show()
}

func (av *auditView) chooseInput()  { av.folderDialog(av.addInput) }
func (av *auditView) chooseOutput() { av.folderDialog(av.outEntry.SetText) }

func (av *auditView) chooseSettingsFile() {
	d := dialog.NewFileOpen(func(r fyne.URIReadCloser, err error) {
		if err != nil {
			showDialog(av.win, dialog.NewError(err, av.win))
			return
		}
		if r == nil {
			return
		}
		r.Close()
		av.fileEntry.SetText(r.URI().Path())
		av.source.SetSelected(settingsFromFile)
	}, av.win)
	d.SetFilter(storage.NewExtensionFileFilter([]string{".json"}))
	d.Resize(fyne.NewSize(800, 560))
	d.Show()
}

// settings returns the settings chosen for the audit, a one-line
// description and a note.
func (av *auditView) settings() (review.Settings, string, string, error) {
	if av.source.Selected == settingsFromFile {
		p := strings.TrimSpace(av.fileEntry.Text)
		if p == "" {
			return review.Settings{}, "", "", errors.New("no settings file chosen")
		}
		s, err := audit.LoadSettings(p)
		if err != nil {
			return s, "", "", err
		}
		return s, s.Describe(), "", nil
	}
	if av.current == nil {
		s := review.DefaultSettings()
		return s, s.Describe(), "", nil
	}
	s, d, note := av.current()
	return s, d, note, audit.CheckSettings(s)
}

func (av *auditView) describeSettings() {
	if av.settInfo == nil || av.source == nil {
		return
	}
	s, d, note, err := av.settings()
	_ = s
	switch {
	case err != nil:
		av.settInfo.SetText("Cannot use these settings: " + err.Error())
		av.settInfo.Importance = widget.DangerImportance
	default:
		if note != "" {
			d += "\nNote: " + note + "."
		}
		av.settInfo.SetText(d)
		av.settInfo.Importance = widget.MediumImportance
	}
	av.settInfo.Refresh()
}

// showMessage shows text under the run row; danger marks a refusal.
func (av *auditView) showMessage(text string, danger bool) {
	av.message.SetText(text)
	av.message.Importance = widget.MediumImportance
	if danger {
		av.message.Importance = widget.DangerImportance
	}
	av.message.Refresh()
	if text == "" {
		av.message.Hide()
	} else {
		av.message.Show()
	}
}

// config builds the engine's configuration from the form.
func (av *auditView) config() (audit.Config, error) {
	var cfg audit.Config
	if len(av.inputs) == 0 {
		return cfg, errors.New("add at least one input folder")
	}
	cfg.Inputs = append([]string(nil), av.inputs...)
	cfg.OutDir = strings.TrimSpace(av.outEntry.Text)
	if cfg.OutDir == "" {
		return cfg, errors.New("choose an output folder")
	}
	w, err := strconv.Atoi(strings.TrimSpace(av.workers.Text))
	if err != nil || w < 1 {
		return cfg, fmt.Errorf("workers %q: want a whole number, 1 or more", av.workers.Text)
	}
	cfg.Workers = w
	cfg.Resume = av.resume.Checked
	cfg.Deidentify = av.deid.Checked
	s, _, _, err := av.settings()
	if err != nil {
		return cfg, err
	}
	js, err := json.Marshal(s)
	if err != nil {
		return cfg, err
	}
	cfg.Settings = js
	cfg.SettingsColumns = audit.SettingsColumns(s)
	analyze := newAuditAnalyzer(s)
	// Remember each analysed case's source folder, so that a case of a
	// de-identified run can be opened too.
	cfg.Analyzer = func(ctx context.Context, c *audit.Case) (*audit.CaseResult, error) {
		av.mu.Lock()
		av.sources[c.ID] = c.Dir
		av.mu.Unlock()
		return analyze(ctx, c)
	}
	return cfg, nil
}

// start runs the audit in the background.
func (av *auditView) start() {
	if av.running {
		return
	}
	av.describeSettings() // the review window's settings may have changed
	cfg, err := av.config()
	if err != nil {
		av.showMessage("Cannot start the audit: "+err.Error(), true)
		return
	}
	// Folders of an earlier run may carry the same case IDs.
	av.mu.Lock()
	av.sources = map[string]string{}
	av.mu.Unlock()
	ctx, cancel := context.WithCancel(context.Background())
	av.cancel = cancel
	av.running = true
	av.gen++
	gen := av.gen
	av.runBtn.Disable()
	av.cancelBtn.Enable()
	av.showMessage("", false)
	av.progress.SetValue(0)
	av.counts.SetText("Looking for cases…")
	av.setRows(nil, cfg.OutDir)
	cfg.Progress = func(p audit.Progress) {
		var last *audit.Row
		if p.Last != nil {
			r := *p.Last
			last = &r
		}
		uiDo(func() {
			if gen == av.gen {
				av.showProgress(p, last)
			}
		})
	}
	go func() {
		sum, err := audit.Run(ctx, cfg)
		uiDo(func() {
			defer av.finished.Add(1)
			if gen != av.gen {
				return
			}
			av.done(cfg, sum, err)
		})
	}()
}

// stop cancels a running audit: the cases in progress stop and nothing
// half-written is left.
func (av *auditView) stop() {
	if av.cancel != nil && av.running {
		av.cancel()
		av.cancelBtn.Disable()
		av.counts.SetText(av.counts.Text + " · stopping…")
	}
}

// showProgress follows the engine's progress report.
func (av *auditView) showProgress(p audit.Progress, last *audit.Row) {
	av.setSearching(p.Phase == "discovering")
	switch p.Phase {
	case "discovering":
		av.counts.SetText("Looking for cases…")
		return
	case "summarising":
		av.progress.SetValue(1)
		av.counts.SetText(countsText(p) + " · writing the summary…")
		return
	}
	if p.Total > 0 {
		av.progress.SetValue(float64(p.Done) / float64(p.Total))
	}
	if last != nil {
		av.rows = append(av.rows, *last)
		av.resort()
	}
	av.counts.SetText(countsText(p))
}

// setSearching shows the moving bar while the engine looks for cases,
// the bar of cases done otherwise.
func (av *auditView) setSearching(on bool) {
	if on {
		av.progress.Hide()
		av.searching.Show()
		av.searching.Start()
		return
	}
	av.searching.Stop()
	av.searching.Hide()
	av.progress.Show()
}

// countsText states the counts, elapsed time and the time left.
func countsText(p audit.Progress) string {
	s := fmt.Sprintf("%d / %d done · %d incomplete · %d failed", p.Done, p.Total, p.Incomplete, p.Failed)
	if p.Resumed > 0 {
		s += fmt.Sprintf(" · %d from an earlier run", p.Resumed)
	}
	s += " · elapsed " + p.Elapsed.Round(time.Second).String()
	if p.ETA > 0 && p.Done < p.Total {
		s += " · about " + roundLeft(p.ETA) + " left"
	}
	return s
}

func roundLeft(d time.Duration) string {
	if d >= time.Hour {
		return d.Round(time.Minute).String()
	}
	return d.Round(time.Second).String()
}

// done shows the outcome of a run.
func (av *auditView) done(cfg audit.Config, sum *audit.Summary, err error) {
	av.setSearching(false)
	av.running = false
	av.cancel = nil
	av.runBtn.Enable()
	av.cancelBtn.Disable()
	switch {
	case err != nil && sum == nil:
		// Refused before it started (usage error, missing input folder,
		// output folder of an audit with other settings): nothing written.
		av.counts.SetText("Not started.")
		av.showMessage("Cannot start the audit: "+err.Error(), true)
		return
	case sum != nil && sum.Interrupted:
		av.setRows(sum.Rows, cfg.OutDir)
		av.counts.SetText(fmt.Sprintf("Stopped after %d cases · %d incomplete · %d failed", len(sum.Rows), sum.Incomplete, sum.Failed))
		av.showMessage(fmt.Sprintf("The audit was cancelled. The %d finished cases are saved in %s; run it again with Resume ticked to continue where it stopped.", len(sum.Rows), cfg.OutDir), false)
		av.rememberInputs(cfg)
		return
	case err != nil:
		if sum != nil {
			av.setRows(sum.Rows, cfg.OutDir)
		}
		av.counts.SetText("The audit did not finish.")
		av.showMessage("The audit failed: "+err.Error(), true)
		return
	}
	av.rememberInputs(cfg)
	av.setRows(sum.Rows, cfg.OutDir)
	av.progress.SetValue(1)
	av.counts.SetText(fmt.Sprintf("%d cases: %d analysed (%d from an earlier run), %d incomplete, %d failed",
		len(sum.Rows), sum.Analysed, sum.Resumed, sum.Incomplete, sum.Failed))
	msg := "Finished. Summary: " + strings.Join(sum.Files, ", ")
	if n := sum.Incomplete + sum.Failed; n > 0 {
		msg += fmt.Sprintf(". %d cases were not analysed; their reasons are in the table and in errors.csv", n)
	}
	for _, p := range sum.Problems {
		msg += "\nSkipped folder: " + p
	}
	av.showMessage(msg, false)
}

// rememberInputs stores the input folders of an audit by its output
// folder.
func (av *auditView) rememberInputs(cfg audit.Config) {
	if abs, err := filepath.Abs(cfg.OutDir); err == nil {
		av.app.Preferences().SetStringList(prefAuditInputs+abs, cfg.Inputs)
	}
}

// sourceDir returns the source folder of row r: known from a run of this
// window, else found again below the input folders of the form by the
// case's source path.
func (av *auditView) sourceDir(r audit.Row) (string, error) {
	av.mu.Lock()
	dir, ok := av.sources[r.Case]
	av.mu.Unlock()
	if ok {
		return dir, nil
	}
	if r.Source == "" {
		return "", fmt.Errorf("case %s was audited de-identified: its source folder is not recorded in the audit. Run the audit again from this window (with Resume) to open its cases", r.Case)
	}
	if len(av.inputs) == 0 {
		return "", fmt.Errorf("the source folder of %s is not known: add the input folder the audit read (the folder holding %q) to Input folders", r.Source, strings.SplitN(r.Source, "/", 2)[0])
	}
	cases, _, err := audit.Discover(av.inputs)
	if err != nil {
		return "", err
	}
	for _, c := range cases {
		if c.Name == r.Source {
			return c.Dir, nil
		}
	}
	return "", fmt.Errorf("case %s was not found below the input folders %s", r.Source, strings.Join(av.inputs, ", "))
}

// openSelected opens the selected case in the review window.
func (av *auditView) openSelected() {
	if av.selected < 0 || av.selected >= len(av.rows) {
		return
	}
	dir, err := av.sourceDir(av.rows[av.selected])
	if err != nil {
		showDialog(av.win, dialog.NewError(err, av.win))
		return
	}
	if fi, err := os.Stat(dir); err != nil || !fi.IsDir() {
		showDialog(av.win, dialog.NewError(fmt.Errorf("the case folder %s is no longer there", dir), av.win))
		return
	}
	if av.rows[av.selected].Source == "" && av.hideIdentity != nil {
		av.hideIdentity()
	}
	if av.openCase != nil {
		av.openCase(dir)
	}
}

// openReport opens the selected case's report with the system's viewer.
func (av *auditView) openReport() {
	if av.selected < 0 || av.selected >= len(av.rows) {
		return
	}
	r := av.rows[av.selected]
	name := ""
	for _, a := range r.Artifacts {
		if name == "" || strings.HasSuffix(a, ".pdf") {
			name = a
		}
	}
	if r.Dir == "" || name == "" {
		return
	}
	av.openPath(filepath.Join(r.Dir, name))
}

// openResults opens the output folder with the system's file manager.
func (av *auditView) openResults() {
	dir := av.outDir
	if dir == "" {
		dir = strings.TrimSpace(av.outEntry.Text)
	}
	if dir == "" {
		showDialog(av.win, dialog.NewInformation("Open folder of results", "Choose an output folder or open an existing audit first.", av.win))
		return
	}
	if _, err := os.Stat(dir); err != nil {
		showDialog(av.win, dialog.NewError(fmt.Errorf("output folder %s: %w", dir, err), av.win))
		return
	}
	av.openPath(dir)
}

func (av *auditView) openPath(p string) {
	abs, err := filepath.Abs(p)
	if err != nil {
		showDialog(av.win, dialog.NewError(err, av.win))
		return
	}
	u, err := url.Parse(storage.NewFileURI(abs).String())
	if err == nil {
		err = av.app.OpenURL(u)
	}
	if err != nil {
		showDialog(av.win, dialog.NewError(fmt.Errorf("opening %s: %w", abs, err), av.win))
	}
}

func (av *auditView) chooseExisting() { av.folderDialog(av.loadExisting) }

// loadExisting shows the audit in outDir (its case records) in the table.
func (av *auditView) loadExisting(outDir string) {
	if av.running {
		av.showMessage("An audit is running; cancel it before opening another one.", true)
		return
	}
	av.gen++
	gen := av.gen
	av.mu.Lock()
	av.sources = map[string]string{}
	av.mu.Unlock()
	av.counts.SetText("Reading " + outDir + "…")
	go func() {
		rows, problems, err := audit.LoadRows(outDir)
		uiDo(func() {
			defer av.finished.Add(1)
			if gen != av.gen {
				return
			}
			if err != nil {
				av.counts.SetText("Not started.")
				av.showMessage("Cannot open the audit: "+err.Error(), true)
				return
			}
			av.outEntry.SetText(outDir)
			if abs, err := filepath.Abs(outDir); err == nil {
				for _, in := range av.app.Preferences().StringList(prefAuditInputs + abs) {
					av.addInput(in)
				}
			}
			av.setRows(rows, outDir)
			av.progress.SetValue(0)
			inc, fail := 0, 0
			for _, r := range rows {
				switch r.Status {
				case audit.StatusIncomplete:
					inc++
				case audit.StatusFailed:
					fail++
				}
			}
			av.counts.SetText(fmt.Sprintf("Earlier audit: %d cases · %d incomplete · %d failed", len(rows), inc, fail))
			msg := ""
			if set, err := audit.LoadSettings(filepath.Join(outDir, "settings.json")); err == nil {
				msg = "Settings of this audit: " + set.Describe() + "."
			}
			if len(rows) == 0 {
				msg += "\nNo case record (cases/*/case.json) was found in " + outDir + "."
			}
			for _, p := range problems {
				msg += "\nUnreadable record: " + p
			}
			av.showMessage(strings.TrimSpace(msg), len(rows) == 0)
		})
	}()
}
