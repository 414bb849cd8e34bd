package gui

import (
	"fmt"
	"os"
)

func run(o Options) int {
	fmt.Fprintln(os.Stderr, "fovea: the window is not built yet")
	return 1
}
