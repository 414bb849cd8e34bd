// Package gui is Fovea's window: every Fyne type lives here and nowhere else.
//
// The window is thin. Analyses (classification, activation maps, occlusion,
// dead-filter scans, filter tiles, the one-page report) come from package
// app/core, which knows nothing of widgets; this package lays them out,
// starts the long tasks on their own goroutines and brings the results back to
// the UI goroutine through the bridge methods in bridge.go, the only callers
// of fyne.Do. Everything else here runs on the UI goroutine.
//
// # Layout
//
// A header names the open model and image, with the buttons that open files.
// On the left, the layer panel lists every layer with its output volume,
// parameters, multiply-accumulates, memory and receptive field; on the right,
// one tab per view (see [Views]). A status line at the bottom reports what
// the window is doing, with a progress bar and a Stop button for model
// loading.
//
// # Long tasks
//
// Loading a model, running the model on an image, occlusion, scans and the
// report run on their own goroutines with a context the Stop buttons cancel.
// A task's result is shown only if its model is still the open one, so a slow
// task never overwrites a newer answer.
package gui

// Options are the window's start-up settings, parsed from the command line by
// the main package. The ONNX Runtime library has already been loaded
// (app/core.Start) before Run is called.
type Options struct {
	ORTLib string // the library that was loaded (shown in the about box)
	Model  string // model to open instead of the embedded demo ("" = demo)
	Demo   string // with no Model: "unhealthy" opens the demo's unhealthy twin
	Image  string // image to open instead of the demo image ("" = demo image)
	Probe  string // folder of probe images: the dead-filter scan runs on it at start
	View   string // view to open first (one of Views); "" = the one used last
	Theme  string // "light", "dark" or "" for the system's (or the one chosen last)
	// Expect is the class the image should have been (label or number): the
	// occlusion view then explains predicted against expected. "" = none.
	Expect string
	// Data is a labelled folder or list file: the scorecard view evaluates
	// the model on it at start. "" = none (the demo's probe images when the
	// scorecard view opens first on the demo).
	Data string
}

// Views lists the names Options.View accepts, in tab order, with the tab
// title each opens.
var Views = []struct{ Name, Title string }{
	{viewModel, "Model"},
	{viewKernels, "Kernels"},
	{viewPredict, "Prediction"},
	{viewMaps, "Layer maps"},
	{viewOcclusion, "Occlusion"},
	{viewHealth, "Filter health"},
	{viewPatches, "Strongest patches"}, // next to the scan it reads
	{viewScorecard, "Scorecard"},
	{viewPair, "Compare"}, // short: the nine titles fit a 1280-pixel window without an overflow menu
}

const (
	viewModel     = "model"
	viewKernels   = "kernels"
	viewPredict   = "predict"
	viewMaps      = "maps"
	viewOcclusion = "occlusion"
	viewHealth    = "health"
	viewScorecard = "scorecard"
	viewPair      = "pair"
	viewPatches   = "patches"
)

// Run opens the window and blocks until it is closed. It returns the process
// exit status: 0 after a normal close, 2 when an option is invalid (the
// message is printed on standard error).
func Run(o Options) int {
	return run(o)
}
