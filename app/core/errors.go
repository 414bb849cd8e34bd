package core

import (
	"errors"
	"fmt"
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
