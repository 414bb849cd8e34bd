package core

import (
	"errors"
	"fmt"
	"regexp"
	"strings"

	"fovea/modelio"
	"fovea/modelio/infer"
)

// InputError is a problem with something the user supplied: a file that is
// missing or malformed, or a setting out of range. File is empty for settings.
type InputError struct {
	File string
	Err  error
}

func (e *InputError) Error() string {
	msg := e.Err.Error()
	if e.File == "" || strings.Contains(msg, e.File) {
		return msg
	}
	return e.File + ": " + msg
}

func (e *InputError) Unwrap() error { return e.Err }

// inputErr wraps err as an *InputError about file.
func inputErr(file string, err error) error {
	if err == nil {
		return nil
	}
	var ie *InputError
	if errors.As(err, &ie) {
		return err
	}
	return &InputError{File: file, Err: err}
}

// inputf makes an *InputError from a message.
func inputf(file, format string, args ...any) error {
	return &InputError{File: file, Err: fmt.Errorf(format, args...)}
}

// IsInput reports whether err is a problem of the user's input (a bad file or
// setting) or of the ONNX Runtime library the user pointed at, rather than a
// failure while running: the command line exits with status 2 for these.
func IsInput(err error) bool {
	var ie *InputError
	var le *infer.LibraryError
	var me *modelio.Error
	return errors.As(err, &ie) || errors.As(err, &le) || errors.As(err, &me)
}

// internalPrefix matches the package prefixes Fovea's packages put on their
// messages ("prep: ", "modelio: ", …), which help in logs and tests but say
// nothing to a user: at the start of the message or after a space or "(".
var internalPrefix = regexp.MustCompile(`(^|[\s(])(?:core|modelio|infer|prep|viz|analysis|classes): `)

// samePath matches a path followed by its own file name ("/dir/m.onnx:
// m.onnx: "), which wrapping can produce.
var samePath = regexp.MustCompile(`([^\s:]*/([^/\s:]+)): ([^/\s:]+): `)

// Message is err's message as a user should read it, in the window and on
// the command line alike: without the internal package prefixes, a file
// named once, on one line. The file and the problem stay.
func Message(err error) string {
	if err == nil {
		return ""
	}
	msg := internalPrefix.ReplaceAllString(err.Error(), "$1")
	msg = samePath.ReplaceAllStringFunc(msg, func(m string) string {
		if g := samePath.FindStringSubmatch(m); g[2] == g[3] {
			return g[1] + ": "
		}
		return m
	})
	return strings.Join(strings.Fields(strings.ReplaceAll(msg, "\n", "; ")), " ")
}
