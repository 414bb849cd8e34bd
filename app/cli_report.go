package main

import (
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"time"

	"fovea/app/core"
)

var reportCommand = &command{
	name:    "report",
	args:    "--image FILE --out FILE [--expected CLASS] [--json]\n       fovea report IMAGE... | FOLDER --out-dir DIR [flags]",
	many:    true,
	summary: "the one-page picture explaining a prediction, to share with a colleague",
	about: `Composes one PNG page: the image as the model saw it, the top-k predictions, the
occlusion heatmaps of the predicted class and (with --expected) of the class it should
have been, side by side on one scale with their legend, the model's name, the
preprocessing and occlusion settings, the date, and the caution that a heatmap is
evidence about this model on this image, not proof. With --json it also prints what the
page states: the model file's SHA-256, the labels' source (and its SHA-256), the
preprocessing, the predictions, the occlusion settings and the date. With several
images or a folder, the model is opened once, each page is written to --out-dir as
NAME.report.png and --json prints one object per line.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		var o occlusionFlags
		o.declare(fs)
		out := fs.String("out", "", "write the PNG to `FILE` (required; - for stdout)")
		k := fs.Int("k", 5, "`N` rows in the table of predictions")
		date := fs.String("date", "", "`YYYY-MM-DD` printed on the page (default: today, or $SOURCE_DATE_EPOCH)")
		asJSON := fs.Bool("json", false, "print what the page states as JSON on stdout (needs --out FILE, not -)")
		outDir := fs.String("out-dir", "", "with several images: write one page per image into `DIR`")
		return func(j *invocation) int {
			files, many, err := j.imageList(o.image)
			if err != nil {
				return j.fail(err)
			}
			if len(files) == 1 {
				o.image = files[0]
			}
			if many {
				if *out != "" || *outDir == "" {
					return j.usageErr("with several images give --out-dir DIR (one page per image)")
				}
				if err := checkOutDir(*outDir); err != nil {
					return j.fail(err)
				}
			} else if *out == "" {
				return j.usageErr("--out FILE is required")
			}
			if *asJSON && *out == "-" {
				return j.usageErr("--json prints on stdout: give --out FILE, not -")
			}
			if *k < 1 {
				return j.usageErr("--k %d: give at least 1", *k)
			}
			when, err := reportDate(*date)
			if err != nil {
				return j.usageErr("%v", err)
			}
			if many {
				used := map[string]bool{}
				return j.eachImage(files, func(f string) int {
					o.image = f
					p := outPath(*outDir, f, ".report.png", used)
					return reportOne(j, &o, p, *k, when, *asJSON, true)
				})
			}
			return reportOne(j, &o, *out, *k, when, *asJSON, false)
		}
	},
}

// reportOne writes the page of o.image to out; with asJSON it prints what
// the page states, on one line when oneLine (several images).
func reportOne(j *invocation, o *occlusionFlags, out string, k int, when time.Time, asJSON, oneLine bool) int {
	res, code := o.run(j)
	if res == nil {
		return code
	}
	versus := -1
	if len(res.occ) > 1 {
		versus = res.occ[1].Target
	}
	img, err := core.LoadImage(o.image)
	if err != nil {
		return j.fail(err)
	}
	page, content, err := j.ws.ReportPage(j.ctx, core.ReportInput{
		Image: img, ImageName: filepath.Base(o.image), K: k, Versus: versus,
		Occlusion: res.set, Occlusions: res.occ, Date: when, Grey: o.grey,
	}, nil)
	if err != nil {
		return j.fail(err)
	}
	if code := j.writePNG(out, page); code != exitOK {
		return code
	}
	switch {
	case asJSON && oneLine:
		return j.writeJSONLine(content)
	case asJSON:
		return j.writeJSON(content)
	case out != "-":
		fmt.Fprintf(j.stdout, "wrote %s (%d×%d)\n", out, page.Bounds().Dx(), page.Bounds().Dy())
	}
	return exitOK
}

// reportDate is the date printed on a report: the flag, else
// $SOURCE_DATE_EPOCH (the reproducible-builds convention, seconds since
// 1970), else now.
func reportDate(flagValue string) (time.Time, error) {
	if flagValue != "" {
		t, err := time.ParseInLocation("2006-01-02", flagValue, time.Local)
		if err != nil {
			return time.Time{}, fmt.Errorf("--date %q: want YYYY-MM-DD", flagValue)
		}
		return t, nil
	}
	if s := os.Getenv("SOURCE_DATE_EPOCH"); s != "" {
		sec, err := strconv.ParseInt(s, 10, 64)
		if err != nil {
			return time.Time{}, fmt.Errorf("$SOURCE_DATE_EPOCH %q: want seconds since 1970", s)
		}
		return time.Unix(sec, 0).UTC(), nil
	}
	return time.Now(), nil
}
