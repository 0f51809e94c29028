//go:build cgo

package main

import "dosecover/review"

// updateSignState shows in the header whether the analysis on screen is
// signed off (a sign-off made on this input, these settings, these
// sonications and these figures), or not for these settings.
func (rw *reviewWindow) updateSignState() {
	if rw.signState == nil {
		return
	}
	r, ok := rw.resultRaw()
	switch {
	case rw.loaded == nil || !ok:
		rw.signState.SetText("")
	case rw.record == nil || len(rw.record.SignOffs) == 0:
		rw.signState.SetText("Not signed off")
	default:
		st := review.SignOffFor(rw.record.SignOffs, rw.hash, r)
		if st.Valid != nil {
			who := st.Valid.Reviewer
			if rw.teaching {
				who = "a reviewer"
			}
			rw.signState.SetText("Signed off: " + st.Valid.Outcome + " (" + who + ")")
		} else {
			rw.signState.SetText("Not signed off for these settings")
		}
	}
}
