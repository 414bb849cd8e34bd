package main

import (
	"flag"
	"fmt"
	"io"
	"os"
	"strings"

	"fovea/app/core"
	"fovea/app/gui"
)

// Exit statuses, the same for every subcommand.
const (
	exitOK    = 0 // done
	exitFail  = 1 // a failure while working (the model failed to run, a write failed, interrupted)
	exitUsage = 2 // bad usage or bad input: a one-line reason naming the file is on stderr
	exitGate  = 3 // a check a pipeline asked for tripped (scan --max-dead)
)

// version is Fovea's release, as in FyneApp.toml.
const version = "0.1.0"

// run dispatches the command line and returns the exit status.
func run(args []string) int {
	return newCLI(os.Stdout, os.Stderr, stderrIsTerminal()).run(args)
}

// stderrIsTerminal reports whether progress lines may go to stderr: only a
// person at a terminal wants them; a pipeline's log does not.
func stderrIsTerminal() bool {
	st, err := os.Stderr.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// cli is one invocation: where its output goes and whether progress is shown.
type cli struct {
	stdout, stderr io.Writer
	progress       bool
}

func newCLI(stdout, stderr io.Writer, progress bool) *cli {
	return &cli{stdout: stdout, stderr: stderr, progress: progress}
}

func (c *cli) run(args []string) int {
	if len(args) == 0 || strings.HasPrefix(args[0], "-") && !isHelp(args[0]) && args[0] != "--version" && args[0] != "-version" {
		return c.window(args)
	}
	name, rest := args[0], args[1:]
	switch name {
	case "help", "-h", "-help", "--help":
		return c.help(rest)
	case "version", "--version", "-version":
		if len(rest) > 0 && !isHelp(rest[0]) {
			return c.usageError("version", "takes no arguments")
		}
		fmt.Fprintf(c.stdout, "fovea %s (needs ONNX Runtime %s or newer)\n", version, runtimeVersion)
		return exitOK
	case "fetch-runtime":
		return c.fetchRuntime(rest)
	case "merge":
		return c.merge(rest)
	}
	if cmd := findCommand(name); cmd != nil {
		return cmd.run(c, rest)
	}
	if looksLikeModel(name) {
		return c.window(args)
	}
	fmt.Fprintf(c.stderr, "fovea: unknown command %q; `fovea help` lists the commands\n", name)
	return exitUsage
}

// looksLikeModel tells a model file given without --model from a mistyped
// command: a name ending in .onnx, or any existing regular file.
func looksLikeModel(arg string) bool {
	if strings.HasSuffix(strings.ToLower(arg), ".onnx") {
		return true
	}
	st, err := os.Stat(arg)
	return err == nil && st.Mode().IsRegular()
}

func isHelp(a string) bool {
	return a == "-h" || a == "-help" || a == "--help" || a == "help"
}

// usageError reports bad usage of a subcommand in one line.
func (c *cli) usageError(cmd, format string, args ...any) int {
	fmt.Fprintf(c.stderr, "fovea %s: %s; see `fovea %s --help`\n", cmd, fmt.Sprintf(format, args...), cmd)
	return exitUsage
}

// window is `fovea [window flags]`: the desktop window.
func (c *cli) window(args []string) int {
	fs := flag.NewFlagSet("fovea", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	var o gui.Options
	ortLib := fs.String("ort-lib", "", "ONNX Runtime shared library `FILE` (default: $FOVEA_ORT_LIB, the user cache, system folders)")
	fs.StringVar(&o.Model, "model", "", "open this ONNX model `FILE` instead of the embedded demo")
	fs.StringVar(&o.Demo, "demo", "", "open the embedded demo `NAME`: healthy or unhealthy (the checkpoint with dead filters)")
	fs.StringVar(&o.Image, "image", "", "open this image `FILE` instead of the demo image")
	fs.StringVar(&o.Probe, "probe", "", "folder `DIR` of probe images for the dead-filter scan")
	fs.StringVar(&o.View, "view", "", "`VIEW` to show first")
	fs.StringVar(&o.Theme, "theme", "", "colour theme: light or dark (default: the system's)")
	fs.StringVar(&o.Data, "data", "", "labelled folder or list `FILE` the scorecard view evaluates at start")
	fs.StringVar(&o.Expect, "expected", "", "`CLASS` the image should have been (name or index), for the side-by-side heatmaps")
	fs.StringVar(&o.Expect, "expect", "", "old name of --expected")
	if err := fs.Parse(args); err != nil {
		fmt.Fprintf(c.stderr, "fovea: %v; `fovea help` lists the commands and the window's options\n", flagError(err))
		return exitUsage
	}
	if o.Demo != "" && o.Demo != "healthy" && o.Demo != "unhealthy" {
		fmt.Fprintf(c.stderr, "fovea: --demo %q: use healthy or unhealthy\n", o.Demo)
		return exitUsage
	}
	// One model file may follow the flags: the desktop entry's Exec line
	// passes the file a file manager opens with Fovea that way.
	extra := fs.Args()
	if len(extra) > 0 && o.Model == "" && looksLikeModel(extra[0]) {
		o.Model, extra = extra[0], extra[1:]
	}
	if len(extra) > 0 {
		fmt.Fprintf(c.stderr, "fovea: unexpected %q; `fovea help` lists the commands and the window's options\n", extra[0])
		return exitUsage
	}
	if err := core.Start(*ortLib); err != nil {
		fmt.Fprintln(c.stderr, "fovea:", core.Message(err))
		return exitUsage
	}
	o.ORTLib = core.Library()
	return gui.Run(o)
}

// help is `fovea help [COMMAND]`.
func (c *cli) help(args []string) int {
	if len(args) > 0 {
		if cmd := findCommand(args[0]); cmd != nil {
			return cmd.run(c, []string{"--help"})
		}
		if args[0] == "fetch-runtime" {
			return c.fetchRuntime([]string{"--help"})
		}
		if args[0] == "merge" {
			return c.merge([]string{"--help"})
		}
		fmt.Fprintf(c.stderr, "fovea help: unknown command %q\n", args[0])
		return exitUsage
	}
	w := c.stdout
	fmt.Fprintf(w, `Fovea shows what a trained ONNX image classifier responds to.

Usage:
  fovea [--model FILE | --demo unhealthy] [--image FILE] [--expected CLASS] [--probe DIR] [--data DIR_OR_LIST] [--view VIEW] [--theme light|dark] [--ort-lib FILE] [MODEL.onnx]
        opens the window (needs a display)
  fovea COMMAND [flags]
        does one job without a display and exits

Commands:
`)
	for _, cmd := range commands {
		fmt.Fprintf(w, "  %-14s %s\n", cmd.name, cmd.summary)
		if place := windowPlace[cmd.name]; place != "" {
			fmt.Fprintf(w, "  %-14s (in the window: %s)\n", "", place)
		}
	}
	fmt.Fprintf(w, "  %-14s %s\n", "merge", "combine the parts of `evaluate --shard K/N` into one result")
	fmt.Fprintf(w, "  %-14s %s\n", "fetch-runtime", "download ONNX Runtime "+runtimeVersion+" into the user cache folder")
	fmt.Fprintf(w, "  %-14s %s\n", "version", "print the version")
	fmt.Fprintf(w, "  %-14s %s\n", "help", "this text; `fovea help COMMAND` or `fovea COMMAND --help` for one command")
	fmt.Fprint(w, `
Every command that runs a model takes --model FILE (default: the embedded demo),
--ort-lib FILE, --labels FILE, --verbose and the preprocessing flags --size WxH,
--resize, --range, --mean, --std, --bgr, --layout (defaults: guessed from the model).

Exit status: 0 done, 1 failure while working, 2 bad usage or bad input (the reason,
naming the file, on stderr), 3 scan --max-dead exceeded or evaluate --min-accuracy not met.
`)
	return exitOK
}
