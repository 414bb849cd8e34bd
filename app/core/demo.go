package core

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"image"
	"io/fs"
	"path"

	"fovea/assets"
	"fovea/modelio"
	"fovea/modelio/prep"
	"fovea/viz/analysis"
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

// DemoProbes returns the embedded demo's probe images: the file system that
// holds them and their names in it, sorted, for analysis.ScanOptions.FS.
// Nothing is written to disk.
func DemoProbes() (fs.FS, []string, error) {
	names, err := analysis.ProbeFilesFS(assets.Files, assets.ProbeDir)
	if err != nil {
		return nil, nil, fmt.Errorf("core: embedded demo: %w", err)
	}
	return assets.Files, names, nil
}
