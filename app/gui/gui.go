// Package gui is Fovea's window: every Fyne type lives here and nowhere else.
//
// The window is thin. Analyses (classification, activation maps, occlusion,
// dead-filter scans, the one-page report) come from package app/core, which
// knows nothing of widgets; this package only lays them out, starts long jobs
// on their own goroutines and brings results back to the UI goroutine through
// the few bridge methods in bridge.go (the only callers of fyne.Do).
package gui

// Options are the window's start-up settings, parsed from the command line by
// the main package. The ONNX Runtime library named by ORTLib has already been
// loaded (app/core.Start) before Run is called.
type Options struct {
	ORTLib string // the library that was loaded (shown in the about box)
	Model  string // model to open instead of the embedded demo ("" = demo)
	Image  string // image to open instead of the demo image ("" = demo)
	Probe  string // folder of probe images for the dead-filter scan
	View   string // view to open first: see Views; "" = the last one used
	Theme  string // "light", "dark" or "" for the system's
}

// Run opens the window and blocks until it is closed. It returns the process
// exit status: 0 after a normal close, 2 when an option is invalid.
func Run(o Options) int {
	return run(o)
}
