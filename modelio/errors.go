package modelio

import (
	"errors"
	"fmt"
)

// Kind classifies an [*Error] so callers can react to the kind of failure
// without parsing messages.
type Kind int

const (
	// KindRead: the file could not be read (missing, permission, I/O).
	KindRead Kind = iota + 1
	// KindNotONNX: the bytes are not an ONNX model at all.
	KindNotONNX
	// KindLimit: the model claims sizes beyond the limits this package
	// accepts (file size, dimensions, element counts).
	KindLimit
	// KindInvalid: an ONNX model that breaks the format's rules (a tensor
	// whose data disagrees with its dims, a cycle, an input nobody provides).
	KindInvalid
	// KindExternal: external tensor data that is missing, outside the
	// model's folder or shorter than claimed.
	KindExternal
	// KindUnsupported: valid ONNX this package does not handle.
	KindUnsupported
	// KindNotFound: the caller asked for a node or tensor the model lacks.
	KindNotFound
)

// Sentinel errors, one per [Kind]: errors.Is(err, modelio.ErrLimit) is true
// for every *Error of KindLimit.
var (
	ErrRead        = errors.New("modelio: cannot read")
	ErrNotONNX     = errors.New("modelio: not an ONNX model")
	ErrLimit       = errors.New("modelio: beyond limits")
	ErrInvalid     = errors.New("modelio: invalid model")
	ErrExternal    = errors.New("modelio: bad external data")
	ErrUnsupported = errors.New("modelio: unsupported")
	ErrNotFound    = errors.New("modelio: not found")
)

var kindSentinel = map[Kind]error{
	KindRead:        ErrRead,
	KindNotONNX:     ErrNotONNX,
	KindLimit:       ErrLimit,
	KindInvalid:     ErrInvalid,
	KindExternal:    ErrExternal,
	KindUnsupported: ErrUnsupported,
	KindNotFound:    ErrNotFound,
}

// Error is the error type of this package. Its message has the form
// "modelio: <file>: <problem>".
type Error struct {
	File string // file name as given to Open or Decode
	Kind Kind
	Msg  string // the problem, without prefix and file
	Err  error  // underlying error, if any
}

func (e *Error) Error() string {
	file := e.File
	if file == "" {
		file = "(unnamed)"
	}
	return "modelio: " + file + ": " + e.Msg
}

// Unwrap returns the underlying error.
func (e *Error) Unwrap() error { return e.Err }

// Is reports whether target is the sentinel of e's Kind.
func (e *Error) Is(target error) bool {
	s, ok := kindSentinel[e.Kind]
	return ok && s == target
}

func newErr(file string, k Kind, format string, args ...any) *Error {
	return &Error{File: file, Kind: k, Msg: fmt.Sprintf(format, args...)}
}

func wrapErr(file string, k Kind, err error, format string, args ...any) *Error {
	msg := fmt.Sprintf(format, args...)
	if err != nil {
		msg += ": " + err.Error()
	}
	return &Error{File: file, Kind: k, Msg: msg, Err: err}
}
