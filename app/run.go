package main

// run dispatches the command line and returns the exit status:
// 0 success, 1 other failures, 2 bad usage or bad input, 3 a gate tripped.
func run(args []string) int {
	if len(args) > 0 && args[0] == "fetch-runtime" {
		return fetchRuntime(args[1:])
	}
	return 2
}
