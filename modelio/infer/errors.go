package infer

import (
	"errors"
	"fmt"
	"regexp"
	"strings"
)

// RuntimeError is a failure reported by ONNX Runtime while opening or
// running a model: an operator it does not implement, shapes that do not fit
// at run time, a model it considers invalid. Node and Op are filled when the
// runtime's message names them.
type RuntimeError struct {
	File     string // the model's file name
	Node, Op string // the failing node and its operator, when known
	Msg      string // the runtime's message, without its status prefix
}

func (e *RuntimeError) Error() string {
	var b strings.Builder
	b.WriteString("infer: ")
	b.WriteString(e.File)
	b.WriteString(": ")
	switch {
	case e.Node != "" && e.Op != "":
		fmt.Fprintf(&b, "node %q (%s): ", e.Node, e.Op)
	case e.Op != "":
		fmt.Fprintf(&b, "%s node: ", e.Op)
	case e.Node != "":
		fmt.Fprintf(&b, "node %q: ", e.Node)
	}
	b.WriteString(e.Msg)
	return b.String()
}

// MemoryError says a run would need more memory than the machine has free.
type MemoryError struct {
	File        string
	Need, Avail int64 // bytes
	What        string
}

func (e *MemoryError) Error() string {
	return fmt.Sprintf("infer: %s: %s need about %s, but only %s of memory is available; run fewer images at a time or capture fewer layers",
		e.File, e.What, mib(e.Need), mib(e.Avail))
}

func mib(b int64) string {
	if b >= 10<<30 {
		return fmt.Sprintf("%d GiB", b>>30)
	}
	return fmt.Sprintf("%d MiB", (b+(1<<20)-1)>>20)
}

// Patterns of ONNX Runtime 1.24 messages that name the node and operator.
// Each has two groups; nodeFirst says which one is the node.
var ortNodePatterns = []struct {
	re        *regexp.Regexp
	nodeFirst bool
}{
	// "Non-zero status code returned while running Conv node. Name:'c1' Status Message: ..."
	{regexp.MustCompile(`while running (\S+) node\. Name:'([^']*)'`), false},
	// "Could not find an implementation for Foo(13) node with name 'n1'"
	{regexp.MustCompile(`implementation for (\S+?)\(\d+\) node with name '([^']*)'`), false},
	// "Node (c1) Op (Conv) [ShapeInferenceError] ..."
	{regexp.MustCompile(`Node \(([^)]*)\) Op \(([^)]*)\)`), true},
	// "This is an invalid model. In Node, ("n1", Foo, "", -1) : ..."
	{regexp.MustCompile(`In Node, \("([^"]*)", ([^,\s]+),`), true},
}

// ortStatusPrefix matches "[ONNXRuntimeError] : 2 : INVALID_ARGUMENT : ".
var ortStatusPrefix = regexp.MustCompile(`^\[ONNXRuntimeError\] : \d+ : [A-Z_]+ : `)

// runtimeError converts an error from onnxruntime_go into a *RuntimeError.
func runtimeError(file string, err error) error {
	if err == nil {
		return nil
	}
	msg := err.Error()
	// onnxruntime_go wraps the runtime's status in its own words.
	for _, p := range []string{"Error creating C session: ", "Error creating C session from file: ", "Error running network: "} {
		msg = strings.TrimPrefix(msg, p)
	}
	msg = ortStatusPrefix.ReplaceAllString(msg, "")
	e := &RuntimeError{File: file, Msg: strings.TrimSpace(msg)}
	for _, p := range ortNodePatterns {
		if m := p.re.FindStringSubmatch(msg); m != nil {
			if p.nodeFirst {
				e.Node, e.Op = m[1], m[2]
			} else {
				e.Op, e.Node = m[1], m[2]
			}
			break
		}
	}
	return e
}

// errTerminated is how ONNX Runtime reports a run stopped by its terminate
// flag ("Exiting due to terminate flag being set to true.").
func isTerminated(err error) bool {
	return err != nil && strings.Contains(err.Error(), "terminate flag")
}

// ErrClosed is returned by a Session used after Close.
var ErrClosed = errors.New("infer: session is closed")
