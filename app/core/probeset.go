package core

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"fovea/viz/analysis"
)

// ProbeSet lists the probe images at path and, when they are labelled,
// their classes:
//   - a folder with images directly inside: those images, unlabelled
//     (labels nil), as the scan always took them;
//   - a list file of path,label lines, or a folder whose sub-folders are
//     named by the model's classes: read as the labelled-folder evaluation
//     reads them (Workspace.OpenLabelled), each image labelled with its
//     class's name; entries that name no class are left out;
//   - any other folder of sub-folders: each sub-folder holding images is a
//     class named after the folder, whatever the name (a probe set may be
//     grouped by something other than the model's classes).
//
// Files are in the order the reader gives them (sorted).
func (w *Workspace) ProbeSet(path string) (files []string, labels map[string]string, err error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, nil, inputErr(path, unwrapPath(err))
	}
	if st.IsDir() {
		if files, err := analysis.ProbeFiles(path); err == nil {
			return files, nil, nil
		}
	}
	l, lerr := w.OpenLabelled(path)
	if lerr == nil && l.Images() > 0 && (!st.IsDir() || l.Images() == len(l.Samples)) {
		names, _ := w.Labels()
		labels = map[string]string{}
		for _, s := range l.Samples {
			if s.Problem != "" {
				continue
			}
			f := l.Path(s.File)
			files = append(files, f)
			if s.Class < len(names) && names[s.Class] != "" {
				labels[f] = names[s.Class]
			} else {
				labels[f] = "class " + strconv.Itoa(s.Class)
			}
		}
		return files, labels, nil
	}
	if !st.IsDir() {
		return nil, nil, lerr
	}
	return folderClasses(path)
}

// folderClasses takes each sub-folder of dir holding images (directly) as a
// class named after the folder.
func folderClasses(dir string) (files []string, labels map[string]string, err error) {
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
		return nil, nil, inputf(dir, "no image files (png, jpg, gif, bmp, tiff, webp) in the folder or in class sub-folders")
	}
	return files, labels, nil
}
