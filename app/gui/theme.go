package gui

import (
	"image/color"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/theme"
)

// Theme choices: Options.Theme and the View menu.
const (
	themeSystem = ""
	themeLight  = "light"
	themeDark   = "dark"
)

// foveaTheme is Fyne's default theme made denser (a data tool shows many
// rows and numbers at once) and, for "light" and "dark", held at one variant
// whatever the desktop prefers.
type foveaTheme struct {
	fyne.Theme
	fixed   bool
	variant fyne.ThemeVariant
}

func (t foveaTheme) Color(n fyne.ThemeColorName, v fyne.ThemeVariant) color.Color {
	if t.fixed {
		v = t.variant
	}
	return t.Theme.Color(n, v)
}

// Sizes smaller than the default's: text 13 instead of 14, paddings a step
// tighter.
func (t foveaTheme) Size(n fyne.ThemeSizeName) float32 {
	switch n {
	case theme.SizeNameText:
		return 13
	case theme.SizeNamePadding:
		return 3
	case theme.SizeNameInnerPadding:
		return 6
	case theme.SizeNameSeparatorThickness:
		return 1
	}
	return t.Theme.Size(n)
}

// themeFor returns the theme of a choice ("" = the desktop's variant).
func themeFor(choice string) fyne.Theme {
	switch choice {
	case themeLight:
		return foveaTheme{Theme: theme.DefaultTheme(), fixed: true, variant: theme.VariantLight}
	case themeDark:
		return foveaTheme{Theme: theme.DefaultTheme(), fixed: true, variant: theme.VariantDark}
	}
	return foveaTheme{Theme: theme.DefaultTheme()}
}

// validTheme reports whether s is a theme choice.
func validTheme(s string) bool {
	return s == themeSystem || s == themeLight || s == themeDark
}
