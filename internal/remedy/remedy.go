// Package remedy makes messages whose way out concerns inputs of a job (an
// output voxel size, an output box, a memory limit): the library's message
// speaks of the values, and a caller that takes those inputs under its own
// names (cmd/ferry: its flags) names them so, word for word otherwise.
//
// A message is a format and its arguments, as for fmt.Errorf; an argument
// that is a Ref is an input, written as its Words or, through Named, as the
// caller's name for it.
package remedy

import (
	"errors"
	"fmt"
	"strings"
)

// Input is an input of a job that a message asks to change.
type Input int

// The inputs a message may ask to change.
const (
	// OutputVoxel is the voxel size of a warped stack, µm.
	OutputVoxel Input = iota + 1
	// OutputBox is the box of an output in µm: a warped stack's, or a
	// displacement field's.
	OutputBox
	// MemoryLimit is the memory a warp may hold input pages in.
	MemoryLimit
	// TargetPage is the page (a voxel index along z of the target space)
	// of a plane to fill.
	TargetPage
	// TargetVoxel is the voxel size of the target volume, µm.
	TargetVoxel
	// GridSpacing is the spacing of a displacement field's grid, µm.
	GridSpacing
	// GridMargin is the margin around the landmarks' box of a
	// displacement field's grid, µm.
	GridMargin
	// TransformFile is a transform file given with other inputs.
	TransformFile
	// Smoothing is the smoothing of a thin-plate spline, or how it is
	// chosen.
	Smoothing
	// Model is the kind of transform fitted.
	Model
)

// Ref is an input as a message names it: Words in the library's message;
// a caller's name, followed by Form (the shape of the value, such as
// "X,Y,Z") when Form is not empty, in the caller's.
type Ref struct {
	Input Input
	Words string
	Form  string
}

// String is the input in words.
func (r Ref) String() string { return r.Words }

// Message is a message that may name inputs. Its zero value is empty.
type Message struct {
	format string
	args   []any
}

// Sprintf is the message fmt.Sprintf(format, args...) would make, with
// Ref arguments as inputs.
func Sprintf(format string, args ...any) Message {
	return Message{format: format, args: args}
}

// String is the message in the library's words.
func (m Message) String() string {
	if m.format == "" {
		return ""
	}
	return fmt.Errorf(m.format, m.args...).Error()
}

// Named is the message with each input named by name, or in words where
// name gives "".
func (m Message) Named(name func(Input) string) string {
	if m.format == "" {
		return ""
	}
	args := make([]any, len(m.args))
	for i, a := range m.args {
		switch a := a.(type) {
		case Ref:
			args[i] = a.Words
			if n := name(a.Input); n != "" {
				args[i] = n
				if a.Form != "" {
					args[i] = n + " " + a.Form
				}
			}
		case Message:
			args[i] = a.Named(name)
		case error:
			args[i] = errors.New(Named(a, name))
		default:
			args[i] = a
		}
	}
	return fmt.Errorf(m.format, args...).Error()
}

// Error is a Message as an error: fmt.Errorf(format, args...) with Ref
// arguments as inputs. Errors among args that the format wraps with %w
// are wrapped as fmt.Errorf wraps them.
type Error struct {
	msg Message
	err error
}

// Errorf is the error fmt.Errorf(format, args...) would make, with Ref
// arguments as inputs.
func Errorf(format string, args ...any) error {
	return &Error{msg: Sprintf(format, args...), err: fmt.Errorf(format, args...)}
}

// Error is the message in the library's words.
func (e *Error) Error() string { return e.err.Error() }

// Unwrap gives what the message wraps, so that errors.Is and errors.As
// see through it.
func (e *Error) Unwrap() error { return e.err }

// Named is err's message with the inputs of the outermost *Error in it
// (and of those that one holds) named by name: the wrapping context stays
// as it is.
func Named(err error, name func(Input) string) string {
	msg := err.Error()
	var e *Error
	if !errors.As(err, &e) {
		return msg
	}
	return strings.Replace(msg, e.Error(), e.msg.Named(name), 1)
}
