//go:build cgo

package main

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"strings"
	"time"

	"dosecover/dosemap/deid"
	"dosecover/dosemap/dicomweb"
	"dosecover/review/dicomout"
	"dosecover/review/report"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"
)

const prefArchiveURL = "archive.url"

// openFromArchive shows the archive search: the archive address
// (remembered), a search form, the studies found, and retrieval of the
// chosen study into the cache with progress and cancel; the study then
// opens as a case. Credentials come from DOSECOVER_ARCHIVE_AUTH.
func (rw *reviewWindow) openFromArchive() { showDialog(rw.win, rw.archiveSearch().dialog) }

// archiveDialog holds the widgets of the archive search, for tests.
type archiveDialog struct {
	dialog                      dialog.Dialog
	url, patient                *dialogEntry
	list                        *widget.List
	status                      *widget.Label
	search, retrieve, cancelRet *widget.Button
}

// archiveSearch builds the archive search dialog (not shown).
func (rw *reviewWindow) archiveSearch() *archiveDialog {
	prefs := rw.app.Preferences()
	urlEntry := newDialogEntry()
	urlEntry.SetPlaceHolder("https://archive.example/dicom-web")
	urlEntry.SetText(prefs.String(prefArchiveURL))
	patient, name, from, to := newDialogEntry(), newDialogEntry(), newDialogEntry(), newDialogEntry()
	from.SetPlaceHolder("YYYY-MM-DD")
	to.SetPlaceHolder("YYYY-MM-DD")
	auth := "none (" + dicomweb.AuthEnv + " is not set)"
	if os.Getenv(dicomweb.AuthEnv) != "" {
		auth = "from " + dicomweb.AuthEnv
	}
	form := widget.NewForm(
		widget.NewFormItem("Archive (DICOMweb)", urlEntry),
		widget.NewFormItem("Credentials", widget.NewLabel(auth)),
		widget.NewFormItem("Patient ID", patient),
		widget.NewFormItem("Name contains", name),
		widget.NewFormItem("Study date from", from),
		widget.NewFormItem("to", to),
	)
	var studies []dicomweb.Study
	chosen := -1
	list := widget.NewList(func() int { return len(studies) },
		func() fyne.CanvasObject { return widget.NewLabel("") },
		func(i widget.ListItemID, o fyne.CanvasObject) {
			s := studies[i]
			o.(*widget.Label).SetText(fmt.Sprintf("%s  %s  %s  %s  [%s]  %d series, %d files", s.Date, s.PatientID, s.PatientName,
				s.Description, strings.Join(s.Modalities, ","), s.Series, s.Instances))
		})
	status := widget.NewLabel("")
	status.Wrapping = fyne.TextWrapWord
	bar := widget.NewProgressBar()
	bar.Hide()
	var cancel context.CancelFunc
	var openBtn, searchBtn, cancelBtn *widget.Button
	list.OnSelected = func(i widget.ListItemID) { chosen = i; openBtn.Enable() }
	client := func() (*dicomweb.Client, error) {
		prefs.SetString(prefArchiveURL, strings.TrimSpace(urlEntry.Text))
		return archiveClient(strings.TrimSpace(urlEntry.Text), os.Getenv(archiveCAEnv))
	}
	searchBtn = widget.NewButton("Search", func() {
		c, err := client()
		if err != nil {
			status.SetText(err.Error())
			return
		}
		var q dicomweb.Query
		q.PatientID, q.Name = strings.TrimSpace(patient.Text), strings.TrimSpace(name.Text)
		if q.From, err = checkDate("from", strings.TrimSpace(from.Text)); err == nil {
			q.To, err = checkDate("to", strings.TrimSpace(to.Text))
		}
		if err != nil {
			status.SetText(err.Error())
			return
		}
		status.SetText("Searching " + c.String() + "…")
		go func() {
			found, err := c.FindStudies(context.Background(), q)
			fyne.Do(func() {
				if err != nil {
					status.SetText(err.Error())
					return
				}
				studies, chosen = found, -1
				list.UnselectAll()
				openBtn.Disable()
				list.Refresh()
				if len(found) == 1 {
					status.SetText("1 study found; choose it and press Retrieve and open")
				} else {
					status.SetText(fmt.Sprintf("%d studies found", len(found)))
				}
			})
		}()
	})
	var d dialog.Dialog
	openBtn = widget.NewButton("Retrieve and open", func() {
		if chosen < 0 || chosen >= len(studies) {
			return
		}
		c, err := client()
		if err != nil {
			status.SetText(err.Error())
			return
		}
		k, err := dicomweb.DefaultCache()
		if err == nil {
			err = os.MkdirAll(k.Root, 0o755)
		}
		if err != nil {
			status.SetText(err.Error())
			return
		}
		u := dicomweb.StudyURL{Base: strings.TrimSpace(urlEntry.Text), Study: studies[chosen].UID}
		var ctx context.Context
		ctx, cancel = context.WithCancel(context.Background())
		bar.SetValue(0)
		bar.Show()
		cancelBtn.Show()
		openBtn.Disable()
		searchBtn.Disable()
		status.SetText("Retrieving study " + u.Study + "…")
		var last time.Time
		go func() {
			dir, err := k.Fetch(ctx, c, u, dicomweb.RetrieveOptions{Progress: func(done, total int) {
				if done < total && time.Since(last) < 200*time.Millisecond {
					return
				}
				last = time.Now()
				fyne.Do(func() {
					bar.SetValue(float64(done) / float64(max(total, 1)))
					status.SetText(fmt.Sprintf("Retrieving: %d of %d files", done, total))
				})
			}})
			fyne.Do(func() {
				bar.Hide()
				cancelBtn.Hide()
				searchBtn.Enable()
				openBtn.Enable()
				if err != nil {
					status.SetText(err.Error())
					return
				}
				d.Hide()
				rw.openCase(dir)
			})
		}()
	})
	openBtn.Disable()
	cancelBtn = widget.NewButton("Cancel retrieval", func() {
		if cancel != nil {
			cancel()
		}
	})
	cancelBtn.Hide()
	top := container.NewVBox(form, container.NewHBox(searchBtn, openBtn, cancelBtn), bar, status)
	content := container.NewBorder(top, nil, nil, nil, list)
	d = dialog.NewCustom("Open from archive", "Close", content, rw.win)
	d.SetOnClosed(func() {
		if cancel != nil {
			cancel()
		}
	})
	d.Resize(fyne.NewSize(860, 600))
	return &archiveDialog{dialog: d, url: urlEntry, patient: patient, list: list, status: status,
		search: searchBtn, retrieve: openBtn, cancelRet: cancelBtn}
}

// storeResults stores the report, the dose map and the regions of the
// current analysis in the archive, as "report --store" does (de-identified
// in teaching mode).
func (rw *reviewWindow) storeResults() {
	raw, _ := rw.resultRaw()
	if raw == nil || rw.loaded == nil {
		showDialog(rw.win, dialog.NewInformation("Store results in archive", "There is no analysis to store yet.", rw.win))
		return
	}
	prefs := rw.app.Preferences()
	urlEntry := newDialogEntry()
	urlEntry.SetPlaceHolder("https://archive.example/dicom-web")
	urlEntry.SetText(prefs.String(prefArchiveURL))
	what := "The report (Encapsulated PDF), the cumulative dose map (CEM43) and the target, lethal region and holes (RT Structure Set) are stored as new series of the case's study."
	if rw.teaching {
		what = "Teaching mode: the results are stored de-identified, as a study of their own that cannot be linked to the patient."
	}
	note := widget.NewLabel(what)
	note.Wrapping = fyne.TextWrapWord
	items := []*widget.FormItem{widget.NewFormItem("Archive (DICOMweb)", urlEntry), widget.NewFormItem("", note)}
	c, caseDir, teaching := rw.loaded.Case, rw.loaded.Dir, rw.teaching
	opt := report.Options{Deidentify: teaching, SignOffs: rw.record.SignOffs, Study: rw.loaded.Study,
		ReviewDate: time.Now().UTC().Truncate(time.Second), InputsSHA256: rw.hash}
	d := dialog.NewForm("Store results in archive", "Store", "Cancel", items, func(ok bool) {
		if !ok {
			return
		}
		base := strings.TrimSpace(urlEntry.Text)
		prefs.SetString(prefArchiveURL, base)
		rw.status.SetText("Storing the results in " + base + "…")
		go func() {
			err := func() error {
				cl, err := archiveClient(base, os.Getenv(archiveCAEnv))
				if err != nil {
					return err
				}
				in, err := report.FromResult(c, raw, opt)
				if err != nil {
					return err
				}
				src, err := dicomout.ReadSource(caseDir, c)
				if err != nil {
					return err
				}
				if teaching {
					dd, err := deid.New(deid.Options{})
					if err != nil {
						return err
					}
					src = src.Deidentified(dd, in.CaseLabel)
				}
				var pdf bytes.Buffer
				if err := report.RenderPDF(&pdf, in); err != nil {
					return err
				}
				objs, _, err := dicomout.Results(src, c, raw, pdf.Bytes(), "Thermal dose coverage report")
				if err != nil {
					return err
				}
				data := make([][]byte, len(objs))
				for n, o := range objs {
					data[n] = o.Data
				}
				return cl.Store(context.Background(), src.StudyUID, data)
			}()
			fyne.Do(func() {
				if err != nil {
					rw.showError("The results were not stored", err)
					return
				}
				rw.status.SetText("Stored the results in " + base)
			})
		}()
	}, rw.win)
	d.Resize(fyne.NewSize(640, 260))
	showDialog(rw.win, d)
}
