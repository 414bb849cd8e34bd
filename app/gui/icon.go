package gui

import "fyne.io/fyne/v2"

// appIcon is the window's icon; nil keeps Fyne's own until the project's
// icon is embedded.
func appIcon() fyne.Resource { return nil }
