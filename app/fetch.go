package main

import (
	"context"
	"fmt"
	"os"
	"os/signal"

	"fovea/modelio/infer"
)

// fetchRuntime is `fovea fetch-runtime`: it needs neither a display nor the
// library it fetches, so it runs before anything else is set up.
func fetchRuntime(args []string) int {
	if len(args) > 0 {
		fmt.Fprintln(os.Stderr, "usage: fovea fetch-runtime\n\nDownloads ONNX Runtime "+infer.RuntimeVersion+" (npm package onnxruntime-node) into the user cache folder.")
		if args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
			return 0
		}
		return 2
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	if _, err := infer.Fetch(ctx, os.Stdout); err != nil {
		fmt.Fprintln(os.Stderr, "fovea:", err)
		return 1
	}
	return 0
}
