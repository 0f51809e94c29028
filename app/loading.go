//go:build cgo

package main

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"dosecover/dosemap"
	"dosecover/review"
	"dosecover/review/view"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"
)

// demoLabel names the built-in demo case wherever the window names a case
// (title, recent cases, exported report, review record), in place of its
// folder in the user cache, whose name only says which build wrote it.
const demoLabel = "Demo case (gel phantom)"

// recentDemo stands for the demo case in the list of recent cases. The list
// keeps the case, not its folder: a new simulator revision writes the demo
// into a new folder. No path contains a NUL byte.
const recentDemo = "\x00demo"

// openDemo opens the built-in demo case, writing it first when needed.
func (rw *reviewWindow) openDemo() {
	if demoCaseDir == nil {
		rw.showNotice("This build of dosecover has no demo case. Open a case folder instead (File ▸ Open folder…).")
		return
	}
	ctx, gen := rw.startJob()
	rw.setBusy("Preparing the demo case (the first time takes a while)…", 0)
	rw.showNotice("Preparing the demo case…")
	go func() {
		dir, err := demoCaseDir()
		fyne.Do(func() {
			defer rw.completed.Add(1)
			if !rw.finishJob(gen) || ctx.Err() != nil {
				return
			}
			if err != nil {
				rw.showError("The demo case could not be prepared", err)
				return
			}
			rw.openFolder(dir, true)
		})
	}()
}

// chooseFolder asks for a case folder.
func (rw *reviewWindow) chooseFolder() {
	d := dialog.NewFolderOpen(func(u fyne.ListableURI, err error) {
		if err != nil {
			rw.showError("The folder could not be opened", err)
			return
		}
		if u != nil {
			rw.openCase(u.Path())
		}
	}, rw.win)
	d.Resize(fyne.NewSize(800, 560))
	d.Show()
}

// dropped opens a folder dropped on the window (a dropped file opens the
// folder holding it).
func (rw *reviewWindow) dropped(_ fyne.Position, items []fyne.URI) {
	for _, u := range items {
		if u.Scheme() != "file" {
			continue
		}
		p := u.Path()
		fi, err := os.Stat(p)
		if err != nil {
			rw.showError("The dropped item could not be opened", err)
			return
		}
		if !fi.IsDir() {
			p = filepath.Dir(p)
		}
		rw.openCase(p)
		return
	}
}

// recentCases returns the recently opened folders, newest first.
func (rw *reviewWindow) recentCases() []string {
	return rw.app.Preferences().StringList(prefRecent)
}

func (rw *reviewWindow) addRecent(dir string) {
	list := []string{dir}
	for _, d := range rw.recentCases() {
		if d != dir && len(list) < 10 {
			list = append(list, d)
		}
	}
	rw.app.Preferences().SetStringList(prefRecent, list)
	rw.win.SetMainMenu(rw.mainMenu())
}

// recentLabel is how a recent folder is listed: hidden in teaching mode
// (the demo, invented, is named in either mode).
func (rw *reviewWindow) recentLabel(n int, dir string) string {
	if dir == recentDemo {
		return demoLabel
	}
	if rw.teaching {
		return fmt.Sprintf("Recent case %d", n+1)
	}
	return dir
}

func (rw *reviewWindow) fillRecentMenu(m *fyne.Menu) {
	m.Items = nil
	for n, d := range rw.recentCases() {
		open := func() { rw.openCase(d) }
		if d == recentDemo {
			open = rw.openDemo
		}
		m.Items = append(m.Items, fyne.NewMenuItem(rw.recentLabel(n, d), open))
	}
	if len(m.Items) == 0 {
		it := fyne.NewMenuItem("(none yet)", nil)
		it.Disabled = true
		m.Items = append(m.Items, it)
	}
}

func (rw *reviewWindow) showRecentMenu() {
	m := fyne.NewMenu("")
	rw.fillRecentMenu(m)
	m.Items = append(m.Items, fyne.NewMenuItemSeparator(), fyne.NewMenuItem("Open the demo case", rw.openDemo))
	widget.ShowPopUpMenuAtPosition(m, rw.win.Canvas(), fyne.NewPos(120, 40))
}

// openCase reads the case folder dir in the background: it hashes the
// input files, finds the review record, reads the case, then prepares and
// analyses it. The case is named by its folder (or the labels its files
// carry, as the reader decides).
func (rw *reviewWindow) openCase(dir string) { rw.openFolder(dir, false) }

// openFolder is openCase; demo marks dir as the built-in demo case, named
// demoLabel rather than by its cache folder.
func (rw *reviewWindow) openFolder(dir string, demo bool) {
	rw.openStudy(dir, demo, "")
}

// openStudy reads study (a StudyInstanceUID; "" for the folder's only
// study) of the case folder dir in the background, as openFolder does; a
// folder of several studies and no choice brings up the study chooser.
func (rw *reviewWindow) openStudy(dir string, demo bool, study string) {
	rw.stopFollowing(false)
	if readCase == nil {
		rw.showNotice("This build of dosecover cannot read case folders yet (its DICOM reader is missing).")
		return
	}
	dir = filepath.Clean(dir)
	rw.pendingDir = dir
	ctx, gen := rw.startJob()
	base := rw.displayPath(dir)
	if demo {
		base = "the demo case"
	}
	rw.setBusy("Checking the files of "+base+"…", 0)
	if rw.loaded == nil {
		rw.showNotice("Reading " + base + "… (the Cancel button at the bottom right stops it)")
	}
	prefs := loadPrefSettings(rw.app.Preferences())
	progress := func(text string, frac float64) {
		fyne.Do(func() {
			if gen == rw.jobGen {
				rw.setBusy(text, frac)
			}
		})
	}
	go func() {
		var (
			lc      *loadedCase
			rec     *reviewRecord
			recErr  error
			hash    string
			nFiles  int
			err     error
			setting = prefs
		)
		hash, nFiles, err = hashInputs(ctx, dir)
		stage("input hash")
		if err == nil {
			rec, recErr = loadRecord(hash)
			if rec != nil {
				setting = rec.Settings
			}
			progress("Reading "+base+"…", 0.05)
			// The reader reports two passes (attributes, then pixel data),
			// each from zero: a drop in done starts the second.
			pass, last := 0, -1
			every := newThrottle(progressEvery)
			lc, err = readCase(ctx, dir, loadOptions{PhaseScale: setting.Thermometry.PhaseScale, Study: study}, func(done, total int) {
				if total <= 0 {
					return
				}
				if done < last && pass == 0 {
					pass = 1
				}
				last = done
				if !every.due(done == total) {
					return
				}
				what := [2]string{"attributes", "images"}[pass]
				progress(fmt.Sprintf("Reading %s (%s): %d of %d files", base, what, done, total),
					0.05+0.225*(float64(pass)+float64(done)/float64(total)))
			})
		}
		stage("case read")
		if err == nil && demo && lc != nil {
			lc.Demo = true
			if lc.Case != nil {
				lc.Case.Label = demoLabel
			}
		}
		fyne.Do(func() {
			defer rw.completed.Add(1)
			if !rw.finishJob(gen) {
				return
			}
			if errors.Is(err, context.Canceled) {
				rw.setBusy("Opening "+base+" was cancelled.", -1)
				if rw.loaded == nil {
					rw.showNotice("Opening " + base + " was cancelled. Open a case folder (File ▸ Open folder…, or drop a folder on this window).")
				}
				return
			}
			if err != nil {
				if rw.loaded == nil {
					rw.showNotice("Open a case folder (File ▸ Open folder…, or drop a folder on this window).")
				}
				rw.showError("The case in "+rw.displayPath(dir)+" could not be read", err)
				return
			}
			if len(lc.Studies) > 1 {
				rw.chooseStudy(dir, demo, lc)
				return
			}
			rw.caseLoaded(lc, hash, nFiles, rec, setting)
			if recErr != nil {
				rw.status.SetText(recErr.Error() + " (a new record will be written)")
			}
		})
	}()
}

// caseLoaded shows a freshly read case and starts its analysis.
func (rw *reviewWindow) caseLoaded(lc *loadedCase, hash string, nFiles int, rec *reviewRecord, s review.Settings) {
	rw.loaded, rw.hash, rw.nFiles = lc, hash, nFiles
	rw.sess, rw.result, rw.selected, rw.pinned = nil, nil, -1, nil
	rw.fromRecord = rec != nil
	if rec == nil {
		rec = &reviewRecord{InputHash: hash}
	}
	rec.Files = nFiles
	rw.record = rec
	rw.settings = s
	if lc.Demo {
		rw.addRecent(recentDemo)
	} else {
		rw.addRecent(lc.Dir)
	}
	rw.updateTitle()
	rw.showLoadInfo()
	rw.probe.set(nil)
	rw.probeMsg.SetText("Click a point on an image to pin it and plot its temperature over the session.")
	c := lc.Case
	rw.opt.WindowCentre, rw.opt.WindowWidth = defaultWindow(c)
	rw.scene = sceneLayers{Anatomy: c.Anatomy, TargetStructure: c.Target()}
	for n := range c.Structures {
		if st := &c.Structures[n]; st.Role == dosemap.RoleAvoid {
			rw.scene.AvoidStructures = append(rw.scene.AvoidStructures, st)
		}
	}
	rw.setViewGrid()
	rw.metrics.update()
	rw.sonOrder = nil
	rw.refreshSonTable()
	rw.setBusy(fmt.Sprintf("Read %d sonications, %d structures; %d files skipped.", len(c.Sonications), len(c.Structures), len(lc.Skipped)), -1)
	if lc.NotReviewable != "" {
		rw.showError("The folder "+rw.displayPath(lc.Dir)+" cannot be reviewed", errors.New(lc.NotReviewable+". The folder tab lists what was found and the files skipped."))
		if c.Anatomy == nil {
			rw.showNotice("Nothing to show: " + lc.NotReviewable + ".")
		}
		return
	}
	if note := rw.missingScannerValues(); note != "" {
		showSettingsDialog(rw.win, rw.settings, note, rw.settingsOrigin(), func(s review.Settings) {
			rw.settings = s
			rw.runAnalysis(true)
		})
		return
	}
	rw.runAnalysis(true)
}

// missingScannerValues returns a request for B0 or TE when the thermometry
// lacks them and the settings do not supply them.
func (rw *reviewWindow) missingScannerValues() string {
	var miss []string
	if rw.loaded.MissingB0 && rw.settings.Thermometry.B0T == 0 {
		miss = append(miss, "the field strength B0 (MagneticFieldStrength, 0018,0087)")
	}
	if rw.loaded.MissingTE && rw.settings.Thermometry.TEms == 0 {
		miss = append(miss, "the echo time TE (EchoTime, 0018,0081)")
	}
	if len(miss) == 0 {
		return ""
	}
	return "The thermometry files of this case do not record " + strings.Join(miss, " or ") +
		". Temperature cannot be computed from phase without them. Enter the values used on the scanner below (from the scan protocol), then Apply."
}

// setViewGrid puts the viewers on the anatomy grid (the dose grid without
// anatomy).
func (rw *reviewWindow) setViewGrid() {
	var ref *dosemap.Geometry
	switch {
	case rw.scene.Anatomy != nil:
		g := rw.scene.Anatomy.Geometry
		ref = &g
	case rw.scene.Dose != nil:
		g := rw.scene.Dose.Geometry
		ref = &g
	}
	for n, v := range rw.viewers {
		v.setScene(&rw.scene, ref)
		rw.sliceChanged(n)
		// Name the planes by their orientation on this grid.
		if sel := rw.planeSel[n]; sel != nil {
			idx := sel.SelectedIndex()
			sel.Options = []string{planeAcquisition.label(ref), planeReformatRow.label(ref), planeReformatCol.label(ref)}
			if idx >= 0 && idx < len(sel.Options) {
				sel.Selected = sel.Options[idx]
			}
			sel.Refresh()
		}
	}
	if ref == nil {
		rw.showNotice("This case has no anatomy series; the images appear when the dose has been computed.")
	} else {
		rw.showNotice("")
	}
}

// showLoadInfo fills the folder tab: the reader's inventory, problems and
// skipped files with reasons.
func (rw *reviewWindow) showLoadInfo() {
	lc := rw.loaded
	if lc == nil {
		rw.loadInfo.SetText("")
		return
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Folder: %s\n%d input files · input SHA-256 %s\n\n", rw.displayPath(lc.Dir), rw.nFiles, rw.hash)
	if lc.Inventory != "" && !rw.teaching {
		b.WriteString(lc.Inventory)
		b.WriteString("\n")
	}
	if len(lc.Problems) > 0 {
		b.WriteString("Problems:\n")
		for _, p := range lc.Problems {
			fmt.Fprintf(&b, "  • %s\n", p)
		}
		b.WriteString("\n")
	}
	if len(lc.Skipped) == 0 {
		b.WriteString("No file was skipped.\n")
	} else {
		fmt.Fprintf(&b, "%d files skipped:\n", len(lc.Skipped))
		for _, s := range lc.Skipped {
			fmt.Fprintf(&b, "  • %s: %s\n", rw.displayPath(s.Path), s.Reason)
		}
	}
	rw.loadInfo.SetText(b.String())
}

// runAnalysis analyses the open case in the background with the current
// settings; prepare recomputes thermometry and per-sonication dose first.
func (rw *reviewWindow) runAnalysis(prepare bool) {
	if rw.loaded == nil {
		return
	}
	if prepareCase == nil {
		rw.showNotice("")
		rw.setBusy("This build of dosecover has no analysis: only the anatomy is shown.", -1)
		return
	}
	ctx, gen := rw.startJob()
	lc, set, sess := rw.loaded, rw.settings, rw.sess
	if prepare {
		sess = nil
	}
	rw.setBusy("Computing temperature and dose…", 0.5)
	go func() {
		var err error
		if sess == nil {
			every := newThrottle(progressEvery)
			sess, err = prepareCase(ctx, lc, set, func(stage string, frac float64) {
				if !every.due(frac >= 1) {
					return
				}
				fyne.Do(func() {
					if gen == rw.jobGen {
						rw.setBusy(stage, 0.5+0.45*frac)
					}
				})
			})
		}
		stage("prepared")
		var res *analysisResult
		if err == nil {
			res, err = sess.Analyze(ctx, set)
		}
		stage("analysed")
		fyne.Do(func() {
			defer rw.completed.Add(1)
			if !rw.finishJob(gen) {
				return
			}
			if errors.Is(err, context.Canceled) {
				rw.setBusy("Analysis cancelled; the previous result stays on screen.", -1)
				return
			}
			if err != nil {
				rw.showError("The analysis failed", err)
				return
			}
			rw.sess = sess
			rw.showResult(res)
			rw.setBusy(fmt.Sprintf("Analysed: %s.", set.Describe()), -1)
			stage("analysed case on screen")
		})
	}()
}

// showResult puts a finished analysis on screen.
func (rw *reviewWindow) showResult(res *analysisResult) {
	hadDose := rw.scene.Dose != nil
	rw.result = res
	if rw.floorEntry.Text == "" || rw.opt.Floor <= 0 {
		rw.opt.Floor = defaultFloor(res.Threshold)
	}
	rw.applyFloor()
	rw.washBar.set(rw.opt.Floor, washTop(res.Threshold), res.Threshold, res.Unit)
	if rw.selected >= len(res.SonRows) {
		rw.selected = -1
	}
	rw.updateScene()
	if !hadDose && rw.scene.Anatomy == nil {
		rw.setViewGrid()
	}
	if !hadDose {
		rw.frameTarget()
	}
	rw.metrics.update()
	rw.sonOrder = nil
	rw.refreshSonTable()
	if rw.pinned != nil {
		rw.pin(*rw.pinned)
	}
	rw.startPeakTemperature(res)
	if rw.record != nil {
		rw.record.Settings = rw.settings
		if !rw.teaching && rw.loaded != nil {
			rw.record.CaseDir = rw.loaded.Dir
			if rw.loaded.Case != nil {
				rw.record.CaseLabel = rw.loaded.Case.Label
			}
		}
		if err := rw.record.save(); err != nil {
			rw.status.SetText(err.Error())
		}
	}
}

// updateScene shows the cumulative dose or the selected sonication's.
func (rw *reviewWindow) updateScene() {
	r := rw.result
	if r == nil {
		return
	}
	rw.scene.Dose = r.Dose
	rw.scene.Threshold = r.Threshold
	rw.scene.Target, rw.scene.Margin, rw.scene.Avoid = r.TargetMask, r.MarginMask, nil
	rw.scene.TargetStructure, rw.scene.AvoidStructures = r.TargetStructure, r.AvoidStructures
	rw.scene.Holes, rw.scene.Outside = r.HoleLabels, r.SpillLabels
	rw.scene.NotMonitored = r.NotMonitored3D
	rw.scene.Planes = nil
	if rw.loaded != nil {
		num := 0
		if rw.selected >= 0 && rw.selected < len(r.SonRows) {
			num = r.SonRows[rw.selected].Number
		}
		rw.scene.Planes = view.CaseStacks(rw.loaded.Case, num)
	}
	for _, o := range rw.planeControls {
		if o == nil {
			continue
		}
		if len(rw.scene.Planes) > 0 {
			o.Show()
		} else {
			o.Hide()
		}
	}
	rw.selInfo.SetText("Showing the cumulative dose")
	if rw.selected >= 0 && rw.selected < len(r.SonicationDose) && r.SonicationDose[rw.selected] != nil {
		row := r.SonRows[rw.selected]
		rw.scene.Dose = r.SonicationDose[rw.selected]
		// Holes and spill are properties of the cumulative dose only.
		rw.scene.Holes, rw.scene.Outside = nil, nil
		rw.selInfo.SetText(fmt.Sprintf("Showing sonication %d alone", row.Number))
	}
	rw.redraw()
}

// selectSonication shows one sonication's dose (n is a row; -1 cumulative).
func (rw *reviewWindow) selectSonication(n int) {
	rw.selected = n
	if n < 0 {
		rw.sonTable.UnselectAll()
	}
	rw.updateScene()
	rw.showPlanesOf(n)
}

// showPlanesOf moves the views to the measured planes of the sonication
// of row n (nothing for -1 or a session on one shared slab): a view
// parallel to one of its stacks goes to that stack's slice nearest the
// sonication's hottest point, the others to the slice through that point,
// where they cross its planes (drawn emphasised).
func (rw *reviewWindow) showPlanesOf(n int) {
	r := rw.result
	if r == nil || n < 0 || n >= len(r.SonRows) || len(rw.scene.Planes) == 0 {
		return
	}
	var stacks []dosemap.Geometry
	for _, st := range rw.scene.Planes {
		if st.Emphasis {
			stacks = append(stacks, st.Geometry)
		}
	}
	if len(stacks) == 0 {
		return
	}
	g := stacks[0]
	hot := g.Point(float64(g.Cols-1)/2, float64(g.Rows-1)/2, float64(g.Slices-1)/2)
	num := r.SonRows[n].Number
	if n < len(r.Sonications) && r.Sonications[n].PeakMM != nil {
		hot = dosemap.Vec3(*r.Sonications[n].PeakMM)
	} else if r.Monitoring != nil {
		for _, re := range r.Monitoring.Reach {
			if re.Sonication == num {
				hot = dosemap.Vec3(re.HottestMM) // its largest measured dose
			}
		}
	}
	for _, v := range rw.viewers {
		if v.ref == nil {
			continue
		}
		_, _, normal, _, _, _, _ := planeAxes(*v.ref, v.kind)
		to := hot
		for _, g := range stacks {
			if math.Abs(normal.Unit().Dot(g.Normal.Unit())) >= 0.999 {
				_, _, k := g.Voxel(hot)
				k = math.Max(0, math.Min(float64(g.Slices-1), math.Round(k)))
				to = hot.Sub(g.Normal.Unit().Scale(hot.Sub(g.Point(0, 0, k)).Dot(g.Normal.Unit())))
				break
			}
		}
		v.goTo(to)
	}
}

// setExcluded ticks or unticks sonication number num and re-analyses.
func (rw *reviewWindow) setExcluded(num int, excluded bool) {
	ex := excludedSet(rw.settings)
	if ex[num] == excluded {
		return
	}
	ex[num] = excluded
	rw.settings.Excluded = rw.settings.Excluded[:0:0]
	for n, on := range ex {
		if on {
			rw.settings.Excluded = append(rw.settings.Excluded, n)
		}
	}
	sortInts(rw.settings.Excluded)
	rw.runAnalysis(false)
}

// openSettings shows the settings dialog; thermometry changes recompute
// temperature, a phase-scale change re-reads the folder.
func (rw *reviewWindow) openSettings() {
	showSettingsDialog(rw.win, rw.settings, "", rw.settingsOrigin(), func(s review.Settings) {
		old := rw.settings
		rw.settings = s
		savePrefSettings(rw.app.Preferences(), s)
		if rw.loaded == nil {
			return
		}
		switch s.Redo(old) {
		case review.RedoReading:
			if rw.record != nil {
				rw.record.Settings = s
				_ = rw.record.save()
			}
			rw.openCase(rw.loaded.Dir)
		case review.RedoThermometry:
			rw.runAnalysis(true)
		default:
			rw.runAnalysis(false)
		}
	})
}

func sortInts(s []int) {
	for i := 1; i < len(s); i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
}

// startPeakTemperature computes the peak temperature map for the hover
// readout off the UI goroutine (the first time it recomputes the
// temperature of every sonication, which also makes the probe instant).
func (rw *reviewWindow) startPeakTemperature(res *analysisResult) {
	sess, set := rw.sess, rw.settings
	if sess == nil {
		return
	}
	go func() {
		v, err := sess.PeakTemperature(set)
		stage("peak temperature")
		fyne.Do(func() {
			defer rw.auxDone.Add(1)
			defer timingDone()
			if rw.result != res || err != nil {
				return
			}
			res.PeakTemp = v
		})
	}()
}

// frameTarget shows the target: both views go to the slice through its
// centroid, centred on it, zoomed so that three target widths fill the
// view (1× to 8×).
func (rw *reviewWindow) frameTarget() {
	r := rw.result
	if r == nil || r.TargetMask == nil {
		return
	}
	var c dosemap.Vec3
	var pts []dosemap.Vec3
	g := r.TargetMask.Geometry
	for i, x := range r.TargetMask.Data {
		if x >= 0.5 {
			a, b, k := g.IJK(i)
			p := g.Point(float64(a), float64(b), float64(k))
			c = c.Add(p)
			pts = append(pts, p)
		}
	}
	if len(pts) == 0 {
		return
	}
	c = c.Scale(1 / float64(len(pts)))
	for k, v := range rw.viewers {
		if v.ref == nil {
			continue
		}
		u, w, _, _, _, width, height := planeAxes(*v.ref, v.kind)
		du, dv := spread(pts, u)+g.Spacing[0], spread(pts, w)+g.Spacing[1]
		zoom := math.Max(1, math.Min(8, math.Min(width/(3*du), height/(3*dv))))
		v.centreOn(c)
		v.zoom = zoom
		v.raster.Refresh()
		rw.sliceChanged(k)
	}
}

// spread returns the extent of pts along direction d, mm.
func spread(pts []dosemap.Vec3, d dosemap.Vec3) float64 {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, p := range pts {
		x := p.Dot(d)
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	return hi - lo
}

// progressEvery is the shortest time between two progress updates on
// screen: a few a second, whatever the number of files.
const progressEvery = 200 * time.Millisecond

// throttle passes at most one event per interval (and every last one).
type throttle struct {
	mu    sync.Mutex
	every time.Duration
	last  time.Time
}

func newThrottle(every time.Duration) *throttle { return &throttle{every: every} }

// due reports whether an event should pass now; final events always pass.
func (t *throttle) due(final bool) bool {
	t.mu.Lock()
	defer t.mu.Unlock()
	now := time.Now()
	if !final && now.Sub(t.last) < t.every {
		return false
	}
	t.last = now
	return true
}
