package gui

import (
	"fyne.io/fyne/v2"

	"fovea/assets"
)

// appIcon is the window's icon, the project's own drawing (assets/icon.png).
func appIcon() fyne.Resource {
	return fyne.NewStaticResource("fovea.png", assets.Icon())
}
