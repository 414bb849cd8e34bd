// Command fovea opens a trained ONNX image classifier and shows what it
// responds to. With no subcommand it opens the window; with one it does the
// same jobs without a display (see `fovea help`).
package main

import (
	"os"

	// Before Fyne initialises: English messages under LANG=C.UTF-8 instead
	// of Fyne's locale errors on every run's stderr.
	_ "fovea/app/core/envlocale"
)

func main() {
	os.Exit(run(os.Args[1:]))
}
