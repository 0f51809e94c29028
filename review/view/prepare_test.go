package view

import (
	"bytes"
	"testing"
)

// TestPrepareThenRender: a Renderer prepared ahead (on another goroutine,
// as a viewer does for the neighbouring slices) draws exactly what a fresh
// Renderer draws, at two views of the same plane, and holds that plane; a
// plane of zero size is refused.
func TestPrepareThenRender(t *testing.T) {
	s := benchScene(128)
	v := FitView(s.Plane, 160, 120)
	zoomed := v.ZoomAt(s.Plane, 80, 60, 2.5)
	r := NewRenderer()
	done := make(chan error)
	go func() { done <- r.Prepare(s) }()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if p, ok := r.Plane(); !ok || p != s.Plane {
		t.Fatalf("prepared plane %+v (%v), want %+v", p, ok, s.Plane)
	}
	if n := len(r.fields); n != 5 { // target, margin, holes, spill, not monitored
		t.Errorf("%d region fields prepared, want the scene's 5 regions", n)
	}
	for _, view := range []View{v, zoomed} {
		got, err := r.Render(s, view, nil)
		if err != nil {
			t.Fatal(err)
		}
		want, err := NewRenderer().Render(s, view, nil)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got.Pix, want.Pix) {
			t.Errorf("view %+v: prepared renderer draws differently from a fresh one", view)
		}
	}
	bad := *s
	bad.Plane.Width = 0
	if err := NewRenderer().Prepare(&bad); err == nil {
		t.Error("a plane of zero width was accepted")
	}
	if _, ok := NewRenderer().Plane(); ok {
		t.Error("a new Renderer claims a plane")
	}
}
