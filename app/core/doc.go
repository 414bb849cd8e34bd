// Package core holds the analyses that Fovea's window and its command line share:
// loading ONNX Runtime, opening a model (a file or the embedded demo) with its
// preprocessing and labels, and the analyses that run it — classification,
// activation maps, occlusion sensitivity, the dead-filter scan, filter tiles
// and the one-page report.
//
// It knows nothing of widgets or flags: package gui lays its results out in a
// window, package main prints them. Keeping both front ends on the same calls
// means a heatmap saved from a script is the heatmap the window shows.
//
// # Workspace
//
// A [Workspace] is one open model with everything needed to run it:
// the preprocessing [prep.Config] in force, the class labels and where they
// came from, and the ONNX Runtime sessions, created on first use. Its methods
// are safe for concurrent use: each analysis takes a snapshot of the settings when
// it starts, so changing them while a analysis runs affects only later analyses.
//
// # Long analyses
//
// Occlusion, scans and reports take a context.Context and a
// func(done, total int) progress callback (nil allowed). They stop promptly
// when the context is cancelled and return its error.
//
// # Errors
//
// Errors name the file and the problem. Problems of the user's input — a
// missing or malformed model, image, label file or probe folder, a setting
// out of range — are returned as [*InputError], so a front end can tell them
// apart from failures of the machinery ([IsInput]). A missing or unusable ONNX
// Runtime library is an [*infer.LibraryError] whose message already says how
// to fetch it; pass it on verbatim.
//
// # Files
//
// Nothing is written into the user's folders except the paths the user
// chose, and those atomically ([WriteFile]). The embedded demo is written to a
// temporary folder only where a path is needed (the probe folder of a scan).
package core
