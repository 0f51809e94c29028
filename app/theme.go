//go:build cgo

package main

import (
	"image/color"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/theme"
)

// reviewTheme is Fyne's dark theme with grey text light enough to read:
// the dark theme draws low-importance labels and disabled text in
// #39393a, 1.6:1 on its background; reviewTheme uses textGrey, which meets
// WCAG 2 AA (4.5:1) on every background of the theme
// (TestThemeTextContrast).
type reviewTheme struct{ fyne.Theme }

// textGrey is the grey of secondary text.
var textGrey = color.NRGBA{R: 0x9c, G: 0x9c, B: 0x9e, A: 0xff}

func newReviewTheme() fyne.Theme { return reviewTheme{theme.DarkTheme()} }

// Color implements fyne.Theme.
func (t reviewTheme) Color(n fyne.ThemeColorName, v fyne.ThemeVariant) color.Color {
	if n == theme.ColorNameDisabled {
		return textGrey
	}
	return t.Theme.Color(n, v)
}
