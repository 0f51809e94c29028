//go:build cgo

package main

import (
	"testing"

	"dosecover/review/view"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/theme"
)

// TestThemeTextContrast computes, from the window's theme, the WCAG 2.x
// contrast ratio (view.ContrastRatio: relative luminance and contrast
// ratio as WCAG 2.1 defines them) of every text colour on every opaque
// background the theme draws text on, and asks WCAG 2 AA for normal text
// (success criterion 1.4.3: at least 4.5:1). It also checks that the test
// would catch the dark theme's own grey.
func TestThemeTextContrast(t *testing.T) {
	th := newReviewTheme()
	v := theme.VariantDark
	texts := []fyne.ThemeColorName{theme.ColorNameForeground, theme.ColorNameDisabled, theme.ColorNamePlaceHolder}
	backs := []fyne.ThemeColorName{theme.ColorNameBackground, theme.ColorNameInputBackground, theme.ColorNameButton,
		theme.ColorNameMenuBackground, theme.ColorNameHeaderBackground, theme.ColorNameOverlayBackground}
	for _, tx := range texts {
		for _, bg := range backs {
			if r := view.ContrastRatio(th.Color(tx, v), th.Color(bg, v)); r < 4.5 {
				t.Errorf("%s text on %s: %.2f:1, want ≥ 4.5:1 (WCAG 2 AA)", tx, bg, r)
			}
		}
	}
	dark := theme.DarkTheme()
	if r := view.ContrastRatio(dark.Color(theme.ColorNameDisabled, v), dark.Color(theme.ColorNameBackground, v)); r >= 4.5 {
		t.Errorf("the dark theme's grey text has %.2f:1: the check would not catch it", r)
	}
	// The plots' guide lines and labels on the panel background.
	if r := view.ContrastRatio(plotGuide, th.Color(theme.ColorNameBackground, v)); r < 4.5 {
		t.Errorf("plot labels %v: %.2f:1, want ≥ 4.5:1", plotGuide, r)
	}
}
