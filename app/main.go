// Command fovea opens a trained ONNX image classifier and shows what it
// responds to. With no subcommand it opens the window; with one it does the
// same jobs without a display (see `fovea help`).
package main

import (
	"os"
)

func main() {
	os.Exit(run(os.Args[1:]))
}
