package main

import (
	"context"
	"fmt"
	"os"
	"os/signal"

	"fovea/modelio/infer"
)

// runtimeVersion is the ONNX Runtime release Fovea fetches.
const runtimeVersion = infer.RuntimeVersion

// fetchRuntime is `fovea fetch-runtime`: it needs neither a display nor the
// library it fetches, so it runs before anything else is set up.
func (c *cli) fetchRuntime(args []string) int {
	if len(args) > 0 {
		help := isHelp(args[0])
		w := c.stderr
		if help {
			w = c.stdout
		}
		fmt.Fprintln(w, "Usage: fovea fetch-runtime\n\nDownloads ONNX Runtime "+infer.RuntimeVersion+
			" (the npm registry's onnxruntime-node package, through npm) into the user cache folder\n"+
			"and checks its SHA-256. Downloads nothing when the library is already there.")
		if help {
			return exitOK
		}
		return exitUsage
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	if _, err := infer.Fetch(ctx, c.stdout); err != nil {
		fmt.Fprintln(c.stderr, "fovea fetch-runtime:", err)
		return exitFail
	}
	return exitOK
}
