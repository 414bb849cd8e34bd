package core

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"image"
	"os"
	"path"
	"path/filepath"
	"sync"

	"fovea/assets"
	"fovea/modelio"
	"fovea/modelio/prep"
)

// The embedded demo (package assets): a parts-sorting classifier, its
// unhealthy twin with dead filters, demo images and probe images.

// Demo names, as in Workspace.Demo.
const (
	DemoHealthy   = "healthy"
	DemoUnhealthy = "unhealthy"
)

// OpenDemo opens the embedded demo model; unhealthy picks the twin trained
// with a deliberate mishap, which has dead filters. Nothing is written to
// disk.
func OpenDemo(unhealthy bool) (*Workspace, error) {
	data, file, demo := assets.Model(), path.Base(assets.ModelFile), DemoHealthy
	if unhealthy {
		data, file, demo = assets.UnhealthyModel(), path.Base(assets.UnhealthyModelFile), DemoUnhealthy
	}
	m, err := modelio.Decode(data, file)
	if err != nil {
		// The demo is checked by the assets package's tests: this is a
		// broken build, not bad input.
		return nil, fmt.Errorf("core: embedded demo: %w", err)
	}
	sum := sha256.Sum256(data)
	return newWorkspace(m, demo, hex.EncodeToString(sum[:]))
}

// DemoImages lists the names of the embedded demo images ("01-washer.png",
// ...), sorted.
func DemoImages() []string {
	var names []string
	for _, p := range assets.Images() {
		names = append(names, path.Base(p))
	}
	return names
}

// DemoImageData returns the bytes of one embedded demo image by name.
func DemoImageData(name string) ([]byte, error) {
	if name == "" || path.Base(name) != name {
		return nil, inputf(name, "no such demo image")
	}
	b, err := assets.Files.ReadFile(path.Join(assets.ImagesDir, name))
	if err != nil {
		return nil, inputf(name, "no such demo image")
	}
	return b, nil
}

// DemoImage decodes one embedded demo image by name.
func DemoImage(name string) (image.Image, error) {
	b, err := DemoImageData(name)
	if err != nil {
		return nil, err
	}
	img, err := prep.Decode(b, name)
	if err != nil {
		return nil, fmt.Errorf("core: embedded demo image: %w", err)
	}
	return img, nil
}

var demoTemp struct {
	sync.Mutex
	probe string // folder holding the probe images, "" until written
	dirs  []string
}

// DemoProbeDir returns a folder holding the demo's probe images. A scan needs
// file paths, so they are written once per process to a new temporary folder
// (never into the user's folders); [Cleanup] removes it.
func DemoProbeDir() (string, error) {
	demoTemp.Lock()
	defer demoTemp.Unlock()
	if demoTemp.probe != "" {
		if _, err := os.Stat(demoTemp.probe); err == nil {
			return demoTemp.probe, nil
		}
	}
	probe, err := assets.Probe()
	if err != nil {
		return "", fmt.Errorf("core: embedded demo: %w", err)
	}
	dir, err := os.MkdirTemp("", "fovea-demo-probe-")
	if err != nil {
		return "", fmt.Errorf("core: a temporary folder for the demo's probe images: %w", err)
	}
	for _, p := range probe {
		b, err := assets.Files.ReadFile(p.File)
		if err == nil {
			err = os.WriteFile(filepath.Join(dir, path.Base(p.File)), b, 0o644)
		}
		if err != nil {
			os.RemoveAll(dir)
			return "", fmt.Errorf("core: writing the demo's probe images to %s: %w", dir, err)
		}
	}
	demoTemp.probe = dir
	demoTemp.dirs = append(demoTemp.dirs, dir)
	return dir, nil
}

// Cleanup removes the temporary files the demo needed. Call it before exit.
func Cleanup() {
	demoTemp.Lock()
	defer demoTemp.Unlock()
	for _, d := range demoTemp.dirs {
		os.RemoveAll(d)
	}
	demoTemp.dirs, demoTemp.probe = nil, ""
}
