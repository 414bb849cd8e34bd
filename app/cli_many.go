package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"fovea/app/core"
)

// imageList returns the images a command works on: --image (single, may be
// "") and the arguments, where a folder stands for the images directly in
// it (by extension, sorted by name). many is true when there is more than
// one image or a folder was given: the command then handles each image in
// turn with the model opened once.
func (j *invocation) imageList(single string) (files []string, many bool, err error) {
	if single != "" {
		files = append(files, single)
	}
	for _, a := range j.args {
		st, serr := os.Stat(a)
		if serr == nil && st.IsDir() {
			found, err := core.ProbeFiles(a)
			if err != nil {
				return nil, false, err
			}
			files = append(files, found...)
			many = true
			continue
		}
		files = append(files, a)
	}
	return files, many || len(files) > 1, nil
}

// outPath names the file written for image in dir: its name without the
// extension, then suffix (".occlusion.png"); a name already used in this run
// gets "-2", "-3", … so that two images called alike from different folders
// do not overwrite each other.
func outPath(dir, image, suffix string, used map[string]bool) string {
	stem := strings.TrimSuffix(filepath.Base(image), filepath.Ext(image))
	name := stem + suffix
	for n := 2; used[name]; n++ {
		name = fmt.Sprintf("%s-%d%s", stem, n, suffix)
	}
	used[name] = true
	return filepath.Join(dir, name)
}

// checkOutDir makes sure --out-dir names a folder (creating it when
// missing).
func checkOutDir(dir string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return &core.InputError{File: dir, Err: fmt.Errorf("cannot make the output folder: %w", err)}
	}
	return nil
}

// eachImage runs one image's work for every file: a problem of one image
// (exit 2, already reported on stderr naming it) is counted and the others
// go on; a failure of the run (exit 1) or an interrupt stops. The exit
// status is 2 when any image had a problem.
func (j *invocation) eachImage(files []string, work func(file string) int) int {
	bad := 0
	for _, f := range files {
		if j.ctx.Err() != nil {
			fmt.Fprintf(j.stderr, "fovea %s: interrupted\n", j.cmd)
			return exitFail
		}
		switch code := work(f); code {
		case exitOK:
		case exitUsage:
			bad++
		default:
			return code
		}
	}
	if bad > 0 {
		fmt.Fprintf(j.stderr, "fovea %s: %d of %d images could not be handled (see above)\n", j.cmd, bad, len(files))
		return exitUsage
	}
	return exitOK
}

// writeJSONLine writes v as one line of JSON (JSON Lines: one object per
// image).
func (j *invocation) writeJSONLine(v any) int {
	b, err := json.Marshal(v)
	if err != nil {
		return j.fail(fmt.Errorf("writing JSON: %w", err))
	}
	b = append(b, '\n')
	if _, err := j.stdout.Write(b); err != nil {
		return j.fail(fmt.Errorf("writing JSON: %w", err))
	}
	return exitOK
}
