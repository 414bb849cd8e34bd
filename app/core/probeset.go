package core

import (
	"os"
	"path/filepath"
	"strings"

	"fovea/viz/analysis"
)

// ProbeSet lists the probe images of dir and, when the folder is labelled,
// their classes: images directly in dir are unlabelled (labels nil);
// otherwise every subfolder holding images is a class named after the
// folder, its images (analysis.ProbeFiles) the class's probes. Hidden
// folders are left out. Files are in folder order, then name order.
func ProbeSet(dir string) (files []string, labels map[string]string, err error) {
	st, err := os.Stat(dir)
	if err != nil {
		return nil, nil, inputErr(dir, unwrapPath(err))
	}
	if !st.IsDir() {
		return nil, nil, inputf(dir, "is not a folder")
	}
	if files, err := analysis.ProbeFiles(dir); err == nil {
		return files, nil, nil
	}
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, nil, inputErr(dir, unwrapPath(err))
	}
	labels = map[string]string{}
	for _, e := range ents {
		if !e.IsDir() || strings.HasPrefix(e.Name(), ".") {
			continue
		}
		sub, err := analysis.ProbeFiles(filepath.Join(dir, e.Name()))
		if err != nil {
			continue // a class folder without images
		}
		for _, f := range sub {
			labels[f] = e.Name()
		}
		files = append(files, sub...)
	}
	if len(files) == 0 {
		return nil, nil, inputf(dir, "no image files (png, jpg, gif, bmp, tiff, webp) in the folder or in class subfolders")
	}
	return files, labels, nil
}
