package main

import (
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"

	"fovea/app/core"
	"fovea/modelio"
	"fovea/viz/analysis"
)

var scanCommand = &command{
	name:    "scan",
	args:    "--probe DIR [--csv | --json] [--max-dead N] [--shard K/N]",
	summary: "find dead, rare and constant filters over a folder of probe images",
	about: `Runs the model on every image in the probe folder and records, for each channel
of each ReLU-like activation layer, on what fraction of the images it fired
(any value above zero), its largest and its mean value. Flags: dead (never fired),
rare (fired on fewer than --rare-percent % of the images, 1 by default), constant (one value everywhere),
zero_kernel and duplicate (from the weights of the convolution feeding it).
--json adds, per channel, the bias of a convolution feeding the activation
directly and the largest value the activation's input reached
(max_preactivation: how far below zero a dead channel stays). A probe folder of
class subfolders adds per_class (firing and mean per class) and the class the
channel is most selective for, with the selectivity index of Morcos et al. 2018:
(best class mean − mean of the other classes' means) / (their sum), 0 to 1.

With --max-dead N the exit status is 3 when more than N channels are dead, so a
training pipeline can stop a bad run. With --shard K/N only the K-th of N slices of
the sorted probe files is scanned and the counts are printed as JSON;
` + "`fovea merge PART...`" + ` adds the N parts up into exactly what one scan prints.`,
	setup: func(fs *flag.FlagSet, cf *common) func(*invocation) int {
		probe := fs.String("probe", "", "folder `DIR` of probe images (default for the demo: its own probe images)")
		asCSV := fs.Bool("csv", false, "print every channel as CSV")
		asJSON := fs.Bool("json", false, "print the report as JSON")
		maxDead := fs.Int("max-dead", -1, "exit with status 3 when more than `N` channels are dead (default: no limit)")
		rarePct := fs.Float64("rare-percent", 100*analysis.DefaultRare, "`PERCENT` of the images under which a firing channel is rare (the window's \"Rare below … %\")")
		rareOld := fs.Float64("rare", 0, "old name: the same threshold as a fraction (0.01 = 1 %)")
		hiddenFlags["rare"] = true
		skip := fs.Bool("skip-unreadable", false, "pass over probe files that cannot be read (listed in the report) instead of stopping")
		all := fs.Bool("all", false, "list every channel in the table, not only flagged ones")
		shard := fs.String("shard", "", "scan only slice `K/N` (1 ≤ K ≤ N) of the sorted probe files and print its counts as JSON")
		return func(j *invocation) int {
			if *asCSV && *asJSON {
				return j.usageErr("give --csv or --json, not both")
			}
			rare := *rarePct / 100
			if j.set["rare"] {
				if !(*rareOld > 0 && *rareOld <= 1) {
					return j.usageErr("--rare %g: give a fraction above 0 and at most 1 (or --rare-percent)", *rareOld)
				}
				rare = *rareOld
			} else if !(*rarePct > 0 && *rarePct <= 100) {
				return j.usageErr("--rare-percent %g: give a percentage above 0 and at most 100", *rarePct)
			}
			if *maxDead < -1 {
				return j.usageErr("--max-dead %d: give 0 or more (or -1 for no limit)", *maxDead)
			}
			opt := analysis.ScanOptions{Rare: rare, SkipUnreadable: *skip}
			var files []string
			var err error
			if *probe != "" {
				files, opt.Labels, err = j.ws.ProbeSet(*probe)
			} else if j.ws.Demo == "" {
				return j.usageErr("--probe DIR is required for your own model")
			} else {
				opt.FS, files, err = core.DemoProbes()
			}
			if err != nil {
				return j.fail(err)
			}
			if *shard != "" {
				if *asCSV || *asJSON || *maxDead >= 0 {
					return j.usageErr("--shard prints its counts as JSON; give --csv, --json or --max-dead to `fovea merge`")
				}
				return scanShard(j, *shard, files, opt)
			}
			r, err := j.ws.Scan(j.ctx, files, opt, j.progressFunc("scanning"))
			if err != nil {
				return j.fail(err)
			}
			if cf.verbose {
				fmt.Fprintf(j.stderr, "scan time:     %s\n", r.Stages)
			}
			return writeScan(j.cli, "scan", j.ws.Name(), r, *asJSON, *asCSV, *all, *maxDead)
		}
	},
}

// writeScan prints a scan report in the chosen form and applies --max-dead.
func writeScan(c *cli, cmd, model string, r *analysis.ScanReport, asJSON, asCSV, all bool, maxDead int) int {
	code := exitOK
	fail := func(err error) int {
		fmt.Fprintf(c.stderr, "fovea %s: %v\n", cmd, err)
		return exitFail
	}
	switch {
	case asJSON:
		if err := r.WriteJSON(c.stdout); err != nil {
			code = fail(err)
		}
	case asCSV:
		if err := r.WriteCSV(c.stdout); err != nil {
			code = fail(err)
		}
	default:
		writeScanTable(c.stdout, model, r, all)
	}
	if code != exitOK {
		return code
	}
	if dead := r.Count(modelio.FlagDead); maxDead >= 0 && dead > maxDead {
		fmt.Fprintf(c.stderr, "fovea %s: %d dead channels, more than --max-dead %d\n", cmd, dead, maxDead)
		return exitGate
	}
	return exitOK
}

// scanShard scans the K-th of N slices of files and prints its counts.
func scanShard(j *invocation, spec string, files []string, opt analysis.ScanOptions) int {
	k, n, err := parseShard(spec)
	if err != nil {
		return j.usageErr("--shard %s: %v", spec, err)
	}
	part := analysis.EmptyScanPart(j.ws.Model, opt.Rare)
	if sh := files[len(files)*k/n : len(files)*(k+1)/n]; len(sh) > 0 {
		r, err := j.ws.Scan(j.ctx, sh, opt, j.progressFunc("scanning"))
		if err != nil {
			return j.fail(err)
		}
		part = r.Part()
	}
	cfg, _ := j.ws.Prep()
	return j.writeJSON(scanPartDoc{Format: partFormat, Command: "scan", Model: j.ws.Name(), Shard: [2]int{k + 1, n}, Settings: cfg.String(), Result: part})
}

// scanPartDoc is what `scan --shard K/N` prints.
type scanPartDoc struct {
	Format   string             `json:"format"`
	Command  string             `json:"command"`
	Model    string             `json:"model"`
	Shard    [2]int             `json:"shard"`
	Settings string             `json:"settings"`
	Result   *analysis.ScanPart `json:"result"`
}

// writeScanTable prints the flagged channels (or all) and a summary per layer.
func writeScanTable(w io.Writer, model string, r *analysis.ScanReport, all bool) {
	fmt.Fprintf(w, "%s: %d probe images, rare below %g %% of them\n", model, r.Images, 100*r.Rare)
	for _, s := range r.Skipped {
		fmt.Fprintf(w, "skipped (unreadable): %s\n", s)
	}
	fmt.Fprintln(w)
	t := table{right: []bool{false, true, true, true, true, false}}
	t.add("layer", "channel", "fires", "max", "mean", "flags")
	rows := 0
	for _, row := range r.Rows() {
		if !all && len(row.Flags) == 0 {
			continue
		}
		rows++
		t.add(row.Layer, strconv.Itoa(row.Index), fmt.Sprintf("%.1f%%", 100*row.Fires), num(row.Max), num(row.Mean), joinFlags(row.Flags))
	}
	if rows == 0 {
		fmt.Fprintln(w, "no channel is flagged")
	} else {
		t.write(w)
	}
	fmt.Fprintln(w)
	s := table{right: []bool{false, true, true, true, true, true, true}}
	countFlags := []modelio.Flag{modelio.FlagDead, modelio.FlagRare, modelio.FlagConstant, modelio.FlagZeroKernel, modelio.FlagDuplicate}
	head := []string{"layer", "channels"}
	for _, f := range countFlags {
		head = append(head, string(f))
	}
	s.add(head...)
	var total [6]int
	for _, l := range r.Layers {
		var n [6]int
		n[0] = len(l.Channels)
		for _, ch := range l.Channels {
			for i, f := range countFlags {
				for _, g := range ch.Flags {
					if g == f {
						n[i+1]++
					}
				}
			}
		}
		cells := []string{l.Name}
		for i, v := range n {
			cells = append(cells, strconv.Itoa(v))
			total[i] += v
		}
		s.add(cells...)
	}
	s.rule()
	cells := []string{"total"}
	for _, v := range total {
		cells = append(cells, strconv.Itoa(v))
	}
	s.add(cells...)
	s.write(w)
}

// num prints a measured value with 4 significant digits.
func num(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

// joinFlags spells flags as the table shows them: separated by spaces.
func joinFlags(flags []modelio.Flag) string {
	s := make([]string, len(flags))
	for i, f := range flags {
		s[i] = string(f)
	}
	return strings.Join(s, " ")
}
