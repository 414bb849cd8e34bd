package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"

	"fovea/modelio/infer"
)

// runtimeVersion is the ONNX Runtime release Fovea fetches.
const runtimeVersion = infer.RuntimeVersion

// fetchRuntime is `fovea fetch-runtime [--into DIR]`: it needs neither a
// display nor the library it fetches, so it runs before anything else is set
// up. --into is how `make install` and `make package` put a copy of the
// library and its licence where the installed binary looks first.
func (c *cli) fetchRuntime(args []string) int {
	fs := flag.NewFlagSet("fovea fetch-runtime", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	into := fs.String("into", "", "also copy the library and its LICENSE into `DIR` (created if missing)")
	usage := func(w io.Writer) {
		fmt.Fprintln(w, "Usage: fovea fetch-runtime [--into DIR]\n\nDownloads ONNX Runtime "+infer.RuntimeVersion+
			" (the npm registry's onnxruntime-node package, through npm) into the user cache folder,\n"+
			"checks its SHA-256 and keeps its licence (MIT) beside it as "+infer.LicenseFile+". Downloads nothing when\n"+
			"the library is already there.\n\n"+
			"  --into DIR   also copy the library and its licence into DIR; a fovea binary finds a library in\n"+
			"               "+infer.BundleDir+" next to its own folder, or in its own folder")
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			usage(c.stdout)
			return exitOK
		}
		return c.usageError("fetch-runtime", "%v", flagError(err))
	}
	if fs.NArg() > 0 {
		if isHelp(fs.Arg(0)) {
			usage(c.stdout)
			return exitOK
		}
		return c.usageError("fetch-runtime", "unexpected argument %q", fs.Arg(0))
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	var err error
	if *into != "" {
		_, err = infer.Install(ctx, *into, c.stdout)
	} else {
		_, err = infer.Fetch(ctx, c.stdout)
	}
	if err != nil {
		fmt.Fprintln(c.stderr, "fovea fetch-runtime:", err)
		return exitFail
	}
	return exitOK
}
