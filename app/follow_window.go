//go:build cgo

package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomweb"
	"dosecover/review/follow"
)

// followState is the session being followed by the window.
type followState struct {
	dir    string
	cancel context.CancelFunc
	shown  bool      // an update is on screen
	last   time.Time // time of the last update
	n      int       // sonications analysed
}

// chooseFollowFolder asks for a folder being filled during a session and
// follows it.
func (rw *reviewWindow) chooseFollowFolder() {
	d := dialog.NewFolderOpen(func(u fyne.ListableURI, err error) {
		if err != nil {
			rw.showError("The folder could not be opened", err)
			return
		}
		if u != nil {
			rw.followFolder(u.Path())
		}
	}, rw.win)
	d.Resize(fyne.NewSize(800, 560))
	d.Show()
}

// followFolder follows the session a scanner writes into dir (package
// review/follow): each completed sonication updates the views, metrics and
// sonication table, keeping slice, zoom, pinned point and selection. The
// settings are those of the window when following starts. Stop following
// reads the folder again as a finished case (for sign-off and export).
func (rw *reviewWindow) followFolder(dir string) {
	rw.followWith(filepath.Clean(dir), rw.displayPath(dir), nil)
}

// chooseFollowArchive asks for the address of an archive study and
// follows it: new instances are retrieved into the study's cache folder
// every 2 s, and that folder is followed.
func (rw *reviewWindow) chooseFollowArchive() {
	entry := newDialogEntry()
	entry.SetPlaceHolder("https://archive.example/dicom-web/studies/1.2.3")
	if base := rw.app.Preferences().String(prefArchiveURL); base != "" {
		entry.SetText(strings.TrimRight(base, "/") + "/studies/")
	}
	auth := "none (" + dicomweb.AuthEnv + " is not set)"
	if os.Getenv(dicomweb.AuthEnv) != "" {
		auth = "from " + dicomweb.AuthEnv
	}
	items := []*widget.FormItem{widget.NewFormItem("Study address", entry), widget.NewFormItem("Credentials", widget.NewLabel(auth))}
	d := dialog.NewForm("Follow archive study", "Follow", "Cancel", items, func(ok bool) {
		if ok {
			rw.followArchive(strings.TrimSpace(entry.Text))
		}
	}, rw.win)
	d.Resize(fyne.NewSize(720, 220))
	showDialog(rw.win, d)
}

// followArchive follows the archive study at addr (URL/studies/UID).
func (rw *reviewWindow) followArchive(addr string) {
	u, ok, err := dicomweb.ParseStudyURL(addr)
	if err == nil && !ok {
		err = fmt.Errorf("%q: want an archive study address, URL/studies/UID", addr)
	}
	var c *dicomweb.Client
	var k *dicomweb.Cache
	if err == nil {
		c, err = archiveClient(u.Base, os.Getenv(archiveCAEnv))
	}
	if err == nil {
		k, err = dicomweb.DefaultCache()
	}
	var dir string
	if err == nil {
		dir = k.Folder(u)
		err = os.MkdirAll(dir, 0o755)
	}
	if err != nil {
		rw.showError("The archive study cannot be followed", err)
		return
	}
	rw.followWith(dir, "study "+u.Study, func(ctx context.Context) error {
		_, err := c.Retrieve(ctx, u.Study, dir, dicomweb.RetrieveOptions{})
		return err
	})
}

// followWith follows dir, named name; fetch, when not nil, brings dir up
// to date from an archive (follow.Options.Fetch).
func (rw *reviewWindow) followWith(dir, name string, fetch func(context.Context) error) {
	rw.stopFollowing(false)
	rw.cancelJob()
	ctx, cancel := context.WithCancel(context.Background())
	fs := &followState{dir: dir, cancel: cancel}
	rw.follow = fs
	set := rw.settings
	rw.setBusy("Following "+name+": waiting for a complete sonication and a structure set…", -1)
	if rw.loaded == nil {
		rw.showNotice("Following " + name + ": the views appear with the first complete sonication.")
	}
	go func() {
		err := follow.Run(ctx, dir, follow.Options{Settings: set, Fetch: fetch}, func(u follow.Update) error {
			ss := &reviewSession{c: u.Case, rs: u.Session}
			res := ss.wrap(u.Result) // off the UI goroutine
			fyne.Do(func() {
				if rw.follow == fs {
					rw.followUpdate(fs, ss, res, u)
				}
			})
			return nil
		}, func(msg string) {
			fyne.Do(func() {
				if rw.follow == fs {
					rw.status.SetText(rw.scrub(msg))
				}
			})
		})
		fyne.Do(func() {
			if err != nil && rw.follow == fs {
				rw.showError("Following "+name+" stopped", err)
			}
		})
	}()
}

// followUpdate shows one update of the session followed.
func (rw *reviewWindow) followUpdate(fs *followState, ss *reviewSession, res *analysisResult, u follow.Update) {
	if !fs.shown {
		fs.shown = true
		rw.loaded = &loadedCase{Dir: fs.dir, Case: u.Case}
		rw.hash, rw.nFiles, rw.record = "", 0, nil // a record belongs to a finished folder
		rw.sess, rw.result, rw.selected, rw.pinned = nil, nil, -1, nil
		rw.updateTitle()
		rw.showLoadInfo()
		c := u.Case
		rw.opt.WindowCentre, rw.opt.WindowWidth = defaultWindow(c)
		rw.scene = sceneLayers{Anatomy: c.Anatomy, TargetStructure: c.Target()}
		for n := range c.Structures {
			if st := &c.Structures[n]; st.Role == dosemap.RoleAvoid {
				rw.scene.AvoidStructures = append(rw.scene.AvoidStructures, st)
			}
		}
		rw.setViewGrid()
	} else {
		rw.loaded.Case = u.Case
		if u.Case.Anatomy != nil && rw.scene.Anatomy == nil {
			// The anatomy completed after the first update.
			rw.scene.Anatomy = u.Case.Anatomy
			rw.opt.WindowCentre, rw.opt.WindowWidth = defaultWindow(u.Case)
			rw.setViewGrid()
		}
	}
	rw.sess = ss
	rw.showResult(res)
	if len(u.New) == 0 {
		return // the anatomy arrived; the figures are those on screen
	}
	fs.last, fs.n = u.At, len(u.Sonications)
	rw.setBusy(fmt.Sprintf("Following %s: %d sonications analysed; last update %s, %.1f s after the last file",
		filepath.Base(fs.dir), fs.n, fs.last.Format("15:04:05"), u.Latency().Seconds()), -1)
}

// stopFollowing ends the following; reopen reads the folder again as a
// finished case.
func (rw *reviewWindow) stopFollowing(reopen bool) {
	fs := rw.follow
	if fs == nil {
		return
	}
	rw.follow = nil
	fs.cancel()
	if reopen && fs.shown {
		rw.openCase(fs.dir)
	} else if reopen {
		rw.setBusy("Following stopped before any sonication was complete.", -1)
	}
}
