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

// fixedVariant is the default theme held at one variant, so that "light" and
// "dark" hold whatever the desktop prefers.
type fixedVariant struct {
	fyne.Theme
	variant fyne.ThemeVariant
}

func (t fixedVariant) Color(n fyne.ThemeColorName, _ fyne.ThemeVariant) color.Color {
	return t.Theme.Color(n, t.variant)
}

// themeFor returns the theme of a choice ("" = the desktop's).
func themeFor(choice string) fyne.Theme {
	switch choice {
	case themeLight:
		return fixedVariant{theme.DefaultTheme(), theme.VariantLight}
	case themeDark:
		return fixedVariant{theme.DefaultTheme(), theme.VariantDark}
	}
	return theme.DefaultTheme()
}

// validTheme reports whether s is a theme choice.
func validTheme(s string) bool {
	return s == themeSystem || s == themeLight || s == themeDark
}
