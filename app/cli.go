package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"image"
	"image/png"
	"io"
	"os"
	"os/signal"
	"strings"

	"fovea/app/core"
	"fovea/modelio/infer"
)

// command is one subcommand of the command-line mode.
type command struct {
	name, args, summary, about string
	// setup declares the command's own flags on fs and returns the work,
	// which runs after the flags are parsed and the model is open.
	setup func(fs *flag.FlagSet, cf *common) func(j *invocation) int
	// noModel: the command does not open a model (none so far).
	noModel bool
	// many: the command takes image files and folders as arguments besides
	// its flags (invocation.args).
	many bool
}

// windowPlace says where the window does each command's job: the tabs
// and commands keep their own names (a tab names what it shows, a command
// what it does), and `fovea help` and each --help say which is which.
var windowPlace = map[string]string{
	"layers":   "the layer table on the left, totals on the Model tab",
	"classify": "the Prediction tab",
	"filters":  "the Kernels tab",
	"maps":     "the Layer maps tab",
	"occlude":  "the Occlusion tab",
	"scan":     "the Filter health tab",
	"top":      "the Strongest patches tab",
	"report":   "the Occlusion tab's Export picture…",
}

// commands in the order `fovea help` lists them.
var commands = []*command{
	layersCommand, classifyCommand, filtersCommand, mapsCommand, occludeCommand, scanCommand, topCommand, reportCommand, evaluateCommand, compareCommand,
}

func findCommand(name string) *command {
	for _, c := range commands {
		if c.name == name {
			return c
		}
	}
	return nil
}

// common are the flags every model command takes.
type common struct {
	model, demo, ortLib, labels string
	output                      string // --output: the output holding the class scores
	verbose                     bool
	prep                        prepFlags
	names                       map[string]bool // the common flags' names, for the help text
}

// prepFlags are the preprocessing flags; empty strings mean "as guessed".
type prepFlags struct {
	size, resize, rng, mean, std, layout string
	bgr                                  bool
}

func (cf *common) declare(fs *flag.FlagSet) {
	before := map[string]bool{}
	fs.VisitAll(func(f *flag.Flag) { before[f.Name] = true })
	fs.StringVar(&cf.model, "model", "", "ONNX model `FILE` (default: the embedded demo)")
	fs.StringVar(&cf.demo, "demo", "", "use the embedded demo `NAME`: healthy or unhealthy (the checkpoint with dead filters)")
	fs.StringVar(&cf.ortLib, "ort-lib", "", "ONNX Runtime shared library `FILE` (default: $FOVEA_ORT_LIB, the user cache, system folders)")
	fs.StringVar(&cf.labels, "labels", "", "class labels `FILE`: one per line, or a JSON array (default: the model's metadata)")
	fs.StringVar(&cf.output, "output", "", "the model output `NAME` that holds the class scores (default: chosen by shape, by which output feeds which, and by name; --verbose says which)")
	fs.BoolVar(&cf.verbose, "verbose", false, "print the model, library, preprocessing, labels and scored output in force, and where a folder's time went, to stderr")
	fs.StringVar(&cf.prep.size, "size", "", "input size `WxH`, e.g. 224x224")
	fs.StringVar(&cf.prep.resize, "resize", "", "how the picture reaches the input size, `MODE` stretch (the whole picture), crop (shorter side to the input size, then the centre) or crop:S (shorter side to S pixels, then the centre; crop:256 for 224 inputs is the common evaluation pipeline)")
	fs.StringVar(&cf.prep.rng, "range", "", "pixel value `RANGE` before mean/std: 0-1, 0-255 or -1-1")
	fs.StringVar(&cf.prep.mean, "mean", "", "per-channel mean `R,G,B` subtracted (in the range above)")
	fs.StringVar(&cf.prep.std, "std", "", "per-channel standard deviation `R,G,B` divided by")
	fs.BoolVar(&cf.prep.bgr, "bgr", false, "feed channels in blue, green, red order")
	fs.StringVar(&cf.prep.layout, "layout", "", "input tensor `LAYOUT`: nchw or nhwc")
	cf.names = map[string]bool{}
	fs.VisitAll(func(f *flag.Flag) {
		if !before[f.Name] {
			cf.names[f.Name] = true
		}
	})
}

// sharedOrder is the order the help text lists the common flags in: the
// model first, then its preprocessing, then the machinery.
var sharedOrder = []string{"model", "demo", "labels", "output", "size", "resize", "range", "mean", "std", "bgr", "layout", "ort-lib", "verbose"}

// invocation is one run of a command: what its work gets, the open model and
// the output streams.
type invocation struct {
	*cli
	cmd string
	ctx context.Context
	ws  *core.Workspace
	fs  *flag.FlagSet
	set map[string]bool // flags given on the command line
	// args are the arguments that are not flags (commands with many set).
	args []string
	// midLine is true while a progress line is drawn without its newline.
	midLine bool
}

// run parses the command's flags, loads ONNX Runtime, opens the model,
// applies the preprocessing and label flags and runs the work.
func (cmd *command) run(c *cli, args []string) int {
	fs := flag.NewFlagSet("fovea "+cmd.name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	var cf common
	work := cmd.setup(fs, &cf)
	cf.declare(fs)
	var positional []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				cmd.usage(c.stdout, fs, &cf)
				return exitOK
			}
			return c.usageError(cmd.name, "%v", flagError(err))
		}
		if fs.NArg() == 0 {
			break
		}
		if !cmd.many {
			return c.usageError(cmd.name, "unexpected argument %q (flags come as --name value)", fs.Arg(0))
		}
		// Images may come before, between and after the flags.
		positional = append(positional, fs.Arg(0))
		args = fs.Args()[1:]
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	if cf.model != "" && cf.demo != "" {
		return c.usageError(cmd.name, "give --model or --demo, not both")
	}
	if cf.demo != "" && cf.demo != "healthy" && cf.demo != "unhealthy" {
		return c.usageError(cmd.name, "--demo %q: use healthy or unhealthy", cf.demo)
	}

	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	j := &invocation{cli: c, cmd: cmd.name, ctx: ctx, fs: fs, set: set, args: positional}
	if err := core.Start(cf.ortLib); err != nil {
		return j.fail(err)
	}
	var ws *core.Workspace
	var err error
	if cf.model != "" {
		ws, err = core.OpenModel(cf.model)
	} else {
		ws, err = core.OpenDemo(cf.demo == "unhealthy")
	}
	if err != nil {
		return j.fail(err)
	}
	defer ws.Close()
	j.ws = ws
	if err := j.applyPrep(&cf.prep); err != nil {
		return j.fail(err)
	}
	if cf.labels != "" {
		if err := ws.LoadLabels(cf.labels); err != nil {
			return j.fail(err)
		}
	}
	if cf.output != "" {
		if err := ws.SetOutput(cf.output); err != nil {
			return j.fail(err)
		}
	}
	if cf.verbose {
		j.describe()
	}
	return work(j)
}

// applyPrep changes the guessed preprocessing by the flags that were given.
func (j *invocation) applyPrep(p *prepFlags) error {
	cfg, _ := j.ws.Prep()
	changed := false
	for _, kv := range []struct{ flag, key, value string }{
		{"size", "size", p.size}, {"resize", "resize", p.resize}, {"range", "range", p.rng},
		{"mean", "mean", p.mean}, {"std", "std", p.std}, {"layout", "layout", p.layout},
	} {
		if !j.set[kv.flag] {
			continue
		}
		if err := cfg.Set(kv.key, kv.value); err != nil {
			return &core.InputError{Err: fmt.Errorf("--%s: %w", kv.flag, trimPrefix(err))}
		}
		changed = true
	}
	if j.set["bgr"] {
		cfg.BGR = p.bgr
		changed = true
	}
	if !changed {
		return nil
	}
	return j.ws.SetPrep(cfg)
}

// trimPrefix drops a package prefix ("prep: ") from an error meant for the
// command line, where the flag name says more.
func trimPrefix(err error) error {
	msg := err.Error()
	if i := strings.Index(msg, ": "); i > 0 && !strings.ContainsAny(msg[:i], " /.") {
		return errors.New(msg[i+2:])
	}
	return err
}

// describe prints the settings in force (--verbose).
func (j *invocation) describe() {
	w := j.stderr
	m := j.ws.Model
	switch {
	case j.ws.Demo != "":
		fmt.Fprintf(w, "model:         %s (embedded demo, %s)\n", m.Name, j.ws.Demo)
	case m.Path != m.Name:
		fmt.Fprintf(w, "model:         %s (%s)\n", m.Name, m.Path)
	default:
		fmt.Fprintf(w, "model:         %s\n", m.Name)
	}
	fmt.Fprintf(w, "ONNX Runtime:  %s (%s)\n", core.Library(), infer.Version())
	for _, n := range m.Notes {
		fmt.Fprintf(w, "               note: %s\n", n)
	}
	cfg, from := j.ws.Prep()
	if j.set["size"] || j.set["resize"] || j.set["range"] || j.set["mean"] || j.set["std"] || j.set["layout"] || j.set["bgr"] {
		from = "guessed from the model, changed by flags"
	}
	fmt.Fprintf(w, "preprocessing: %s (%s)\n", cfg, from)
	if from == core.FromGuess {
		for _, n := range j.ws.GuessNotes() {
			fmt.Fprintf(w, "               note: %s\n", n)
		}
	}
	if len(m.Outputs) > 1 {
		name, why := j.ws.ScoreOutput()
		fmt.Fprintf(w, "scores:        output %q (%s)\n", name, why)
	}
	labels, lfrom := j.ws.Labels()
	if len(labels) > 0 {
		fmt.Fprintf(w, "labels:        %d from %s\n", len(labels), lfrom)
	} else {
		fmt.Fprintf(w, "labels:        %s\n", lfrom)
	}
}

// fail reports err in one line and returns the exit status for it.
func (j *invocation) fail(err error) int {
	if j.midLine {
		fmt.Fprintln(j.stderr)
		j.midLine = false
	}
	switch {
	case errors.Is(err, context.Canceled) && j.ctx != nil && j.ctx.Err() != nil:
		fmt.Fprintf(j.stderr, "fovea %s: interrupted\n", j.cmd)
		return exitFail
	case core.IsInput(err):
		fmt.Fprintf(j.stderr, "fovea %s: %s\n", j.cmd, core.Message(err))
		return exitUsage
	}
	fmt.Fprintf(j.stderr, "fovea %s: %s\n", j.cmd, core.Message(err))
	return exitFail
}

// usageErr reports bad usage found after parsing.
func (j *invocation) usageErr(format string, args ...any) int {
	return j.usageError(j.cmd, format, args...)
}

// flagError rewords the flag package's parse errors in our terms.
func flagError(err error) string {
	// The flag package names flags with one dash; our help uses two.
	msg := strings.ReplaceAll(err.Error(), " -", " --")
	if name, ok := strings.CutPrefix(msg, "flag provided but not defined: "); ok {
		return "unknown flag " + name
	}
	if rest, ok := strings.CutPrefix(msg, "flag needs an argument: "); ok {
		return rest + " needs a value"
	}
	if strings.HasPrefix(msg, "invalid value ") {
		// invalid value "x" for flag -k: parse error
		if i := strings.Index(msg, ": "); i > 0 {
			return msg[:i] + " (not a valid value)"
		}
	}
	return msg
}

// progressFunc returns a progress callback that redraws one line on stderr
// when stderr is a terminal, and nil otherwise.
func (j *invocation) progressFunc(what string) func(done, total int) {
	if !j.progress {
		return nil
	}
	last := -1
	return func(done, total int) {
		if total <= 0 {
			return
		}
		pct := done * 100 / total
		if pct == last && done != total {
			return
		}
		last = pct
		fmt.Fprintf(j.stderr, "\r%s: %d/%d (%d%%)", what, done, total, pct)
		j.midLine = done < total
		if done >= total {
			fmt.Fprintln(j.stderr)
		}
	}
}

// writeJSON writes v to stdout as indented JSON.
func (j *invocation) writeJSON(v any) int {
	enc := json.NewEncoder(j.stdout)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	if err := enc.Encode(v); err != nil {
		return j.fail(fmt.Errorf("writing JSON: %w", err))
	}
	return exitOK
}

// hiddenFlags are old flag names kept working for scripts but no longer
// listed in --help (README: "Renamed").
var hiddenFlags = map[string]bool{}

// usage prints a command's help text: what it does, its own flags, then the
// flags every command shares.
func (cmd *command) usage(w io.Writer, fs *flag.FlagSet, cf *common) {
	fmt.Fprintf(w, "Usage: fovea %s %s\n\n%s\n", cmd.name, cmd.args, cmd.about)
	if place := windowPlace[cmd.name]; place != "" {
		fmt.Fprintf(w, "\nIn the window: %s.\n", place)
	}
	var own, shared []*flag.Flag
	fs.VisitAll(func(f *flag.Flag) {
		if !cf.names[f.Name] && !hiddenFlags[f.Name] {
			own = append(own, f)
		}
	})
	for _, name := range sharedOrder {
		if f := fs.Lookup(name); f != nil && cf.names[name] {
			shared = append(shared, f)
		}
	}
	section := func(title string, flags []*flag.Flag) {
		if len(flags) == 0 {
			return
		}
		fmt.Fprintf(w, "\n%s:\n", title)
		for _, f := range flags {
			value, text := flag.UnquoteUsage(f)
			head := "--" + f.Name
			if value != "" {
				head += " " + value
			}
			if f.DefValue != "" && f.DefValue != "false" && f.DefValue != "0" && f.DefValue != "-1" {
				text += " (default " + f.DefValue + ")"
			}
			if len(head) <= 20 {
				fmt.Fprintf(w, "  %-20s %s\n", head, text)
			} else {
				fmt.Fprintf(w, "  %s\n  %-20s %s\n", head, "", text)
			}
		}
	}
	section("Flags", own)
	section("Model and preprocessing (every command)", shared)
}

// writePNG writes img to path atomically, or to stdout for "-".
func (j *invocation) writePNG(path string, img image.Image) int {
	if path == "-" {
		if err := png.Encode(j.stdout, img); err != nil {
			return j.fail(fmt.Errorf("writing PNG to stdout: %w", err))
		}
		return exitOK
	}
	if err := core.SavePNG(path, img); err != nil {
		return j.fail(err)
	}
	return exitOK
}
