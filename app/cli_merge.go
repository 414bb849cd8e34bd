package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"

	"fovea/viz/analysis"
)

// maxPartBytes bounds one part file (its mistakes grow with the images).
const maxPartBytes = 1 << 30

// merge is `fovea merge PART...`: it needs no model and no runtime. It
// reads the partial results `evaluate --shard K/N` printed, checks that they
// are the N shards of one run, each once, and prints exactly what that run
// would have printed without --shard.
func (c *cli) merge(args []string) int {
	fs := flag.NewFlagSet("fovea merge", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	var out evalOutput
	out.declare(fs)
	maxDead := fs.Int("max-dead", -1, "scan parts: exit with status 3 when more than `N` channels are dead")
	all := fs.Bool("all", false, "scan parts: list every channel in the table, not only flagged ones")
	usage := func(w io.Writer) {
		fmt.Fprint(w, `Usage: fovea merge PART... [--json | --csv] [--top N] [--min-accuracy X]

Combines the partial results of `+"`fovea evaluate --shard K/N`"+` or
`+"`fovea scan --shard K/N`"+` (one file per shard, all N of them) into exactly what one
run over all the images prints. Counts and sums add up, maxima are taken; mistakes
and least sure answers are concatenated and sorted again.

Flags:
`)
		fs.VisitAll(func(f *flag.Flag) {
			value, text := flag.UnquoteUsage(f)
			fmt.Fprintf(w, "  --%-18s %s\n", f.Name+" "+value, text)
		})
	}
	// Flags may come before or after the files.
	var files []string
	rest := args
	for {
		if err := fs.Parse(rest); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				usage(c.stdout)
				return exitOK
			}
			return c.usageError("merge", "%v", flagError(err))
		}
		if fs.NArg() == 0 {
			break
		}
		files = append(files, fs.Arg(0))
		rest = fs.Args()[1:]
	}
	if len(files) == 0 {
		return c.usageError("merge", "give the part files `fovea evaluate --shard K/N` or `fovea scan --shard K/N` wrote")
	}
	if msg := out.check(); msg != "" {
		return c.usageError("merge", "%s", msg)
	}
	var first *partHeader
	seen := map[int]string{}
	byShard := map[int]*partHeader{}
	for _, f := range files {
		p, err := readPart(f)
		if err != nil {
			fmt.Fprintf(c.stderr, "fovea merge: %v\n", err)
			return exitUsage
		}
		if first == nil {
			first = p
		}
		switch {
		case p.Shard[1] != first.Shard[1]:
			fmt.Fprintf(c.stderr, "fovea merge: %s: shard %d/%d, but %s is a shard of %d\n", f, p.Shard[0], p.Shard[1], files[0], first.Shard[1])
			return exitUsage
		case p.Settings != first.Settings:
			fmt.Fprintf(c.stderr, "fovea merge: %s: preprocessing %s differs from %s's %s\n", f, p.Settings, files[0], first.Settings)
			return exitUsage
		case seen[p.Shard[0]] != "":
			fmt.Fprintf(c.stderr, "fovea merge: %s and %s are both shard %d/%d\n", seen[p.Shard[0]], f, p.Shard[0], p.Shard[1])
			return exitUsage
		}
		if p.Command != first.Command {
			fmt.Fprintf(c.stderr, "fovea merge: %s is a part of `fovea %s`, %s of `fovea %s`\n", f, p.Command, files[0], first.Command)
			return exitUsage
		}
		seen[p.Shard[0]] = f
		byShard[p.Shard[0]] = p
	}
	for k := 1; k <= first.Shard[1]; k++ {
		if seen[k] == "" {
			fmt.Fprintf(c.stderr, "fovea merge: shard %d/%d is missing\n", k, first.Shard[1])
			return exitUsage
		}
	}
	// The parts in shard order: skipped files are then listed as one run lists them.
	ordered := make([]*partHeader, 0, len(files))
	for k := 1; k <= first.Shard[1]; k++ {
		ordered = append(ordered, byShard[k])
	}
	if first.Command == "scan" {
		if out.top != -1 || out.minAcc != "" {
			return c.usageError("merge", "--top and --min-accuracy are for evaluate parts")
		}
		var sparts []*analysis.ScanPart
		for _, p := range ordered {
			var sp analysis.ScanPart
			if err := json.Unmarshal(p.Result, &sp); err != nil {
				fmt.Fprintf(c.stderr, "fovea merge: %s: %v\n", seen[p.Shard[0]], err)
				return exitUsage
			}
			sparts = append(sparts, &sp)
		}
		merged, err := analysis.MergeScan(sparts)
		if err == nil {
			var r *analysis.ScanReport
			if r, err = merged.Report(); err == nil {
				return writeScan(c, "merge", first.Model, r, out.json, out.csv, *all, *maxDead)
			}
		}
		fmt.Fprintf(c.stderr, "fovea merge: %v\n", trimPrefix(err))
		return exitUsage
	}
	if *maxDead != -1 || *all {
		return c.usageError("merge", "--max-dead and --all are for scan parts")
	}
	var parts []*analysis.Evaluation
	for _, p := range ordered {
		var e analysis.Evaluation
		if err := json.Unmarshal(p.Result, &e); err != nil {
			fmt.Fprintf(c.stderr, "fovea merge: %s: %v\n", seen[p.Shard[0]], err)
			return exitUsage
		}
		parts = append(parts, &e)
	}
	e, err := analysis.Merge(parts)
	if err != nil {
		fmt.Fprintf(c.stderr, "fovea merge: %v\n", trimPrefix(err))
		return exitUsage
	}
	if e.Images == 0 {
		fmt.Fprintf(c.stderr, "fovea merge: %s: none of the %d entries could be evaluated\n", e.Data, e.Entries)
		writeSkipped(c.stderr, e)
		return exitUsage
	}
	return out.write(c, "merge", e)
}

// partHeader is what every part file holds around its counts.
type partHeader struct {
	Format   string          `json:"format"`
	Command  string          `json:"command"`
	Model    string          `json:"model"`
	Shard    [2]int          `json:"shard"`
	Settings string          `json:"settings"`
	Result   json.RawMessage `json:"result"`
}

// readPart reads and checks one part file.
func readPart(file string) (*partHeader, error) {
	f, err := os.Open(file)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, maxPartBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %v", file, err)
	}
	if len(data) > maxPartBytes {
		return nil, fmt.Errorf("%s: larger than %d bytes", file, maxPartBytes)
	}
	var p partHeader
	if err := json.Unmarshal(data, &p); err != nil {
		return nil, fmt.Errorf("%s: not a part file of `--shard` (%v)", file, err)
	}
	if p.Format != partFormat || len(p.Result) == 0 {
		return nil, fmt.Errorf("%s: not a part file of `--shard` (format %q)", file, p.Format)
	}
	if p.Command != "evaluate" && p.Command != "scan" {
		return nil, fmt.Errorf("%s: a part of `fovea %s`; only evaluate and scan parts can be merged", file, p.Command)
	}
	if p.Shard[1] < 1 || p.Shard[0] < 1 || p.Shard[0] > p.Shard[1] {
		return nil, fmt.Errorf("%s: shard %d/%d is not K/N with 1 ≤ K ≤ N", file, p.Shard[0], p.Shard[1])
	}
	return &p, nil
}
