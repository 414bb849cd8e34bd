package core

import (
	"errors"
	"image"
)

// The embedded demo: a parts-sorting classifier and its unhealthy twin, with
// demo images and a folder of probe images (package fovea/assets).

var errDemoNotWired = errors.New("core: the embedded demo is not wired yet (package assets is still being generated)")

// OpenDemo opens the embedded demo model; unhealthy picks the twin trained
// with a deliberate mishap, which has dead filters.
func OpenDemo(unhealthy bool) (*Workspace, error) {
	return nil, errDemoNotWired
}

// DemoImages lists the names of the embedded demo images.
func DemoImages() []string { return nil }

// DemoImage decodes one embedded demo image by name.
func DemoImage(name string) (image.Image, error) { return nil, errDemoNotWired }

// DemoProbeDir returns a folder holding the demo's probe images, written to a
// temporary folder on first use (removed by [Cleanup]).
func DemoProbeDir() (string, error) { return "", errDemoNotWired }

// Cleanup removes the temporary files the demo needed. Call it before exit.
func Cleanup() {}

// DemoImageData returns the bytes of one embedded demo image by name.
func DemoImageData(name string) ([]byte, error) { return nil, errDemoNotWired }

// Demo names, as in Workspace.Demo.
const (
	DemoHealthy   = "healthy"
	DemoUnhealthy = "unhealthy"
)
