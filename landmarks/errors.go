package landmarks

import (
	"fmt"
	"strconv"
	"strings"
	"unicode/utf8"
)

// InputError is a fault in a user's file. Its Error is one line of the form
// "cells.csv:14: column "z": "1.2.3" is not a number", with the line left
// out when the fault is in no particular line and the column when it is in
// no particular column.
type InputError struct {
	// File is the name of the file as the user gave it.
	File string
	// Line is the 1-based physical line of the file, or 0.
	Line int
	// Column is the header name of the column at fault, or "".
	Column string
	// Msg says what is wrong, without the file, line and column.
	Msg string
}

// Error is the one-line message: file, line and column, then what is wrong.
func (e *InputError) Error() string {
	var b strings.Builder
	switch {
	case e.File != "" && e.Line > 0:
		b.WriteString(e.File)
		b.WriteByte(':')
		b.WriteString(strconv.Itoa(e.Line))
		b.WriteString(": ")
	case e.File != "":
		b.WriteString(e.File)
		b.WriteString(": ")
	case e.Line > 0:
		b.WriteString("line ")
		b.WriteString(strconv.Itoa(e.Line))
		b.WriteString(": ")
	}
	if e.Column != "" {
		b.WriteString("column ")
		b.WriteString(quote(e.Column))
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// maxQuoted is how many characters of a user's value a message repeats:
// enough to recognise it, not so many that a stray megabyte field floods the
// terminal.
const maxQuoted = 40

// quote returns s in double quotes, shortened to maxQuoted characters, for
// messages that must stay on one line.
func quote(s string) string {
	if utf8.RuneCountInString(s) <= maxQuoted {
		return strconv.Quote(s)
	}
	n := 0
	for i := range s {
		if n == maxQuoted {
			return strconv.Quote(s[:i]) + "..."
		}
		n++
	}
	return strconv.Quote(s)
}

// maxHeaderListed bounds the characters of a header listed in a message: a
// one-line header of 10 MB once made a 10 MB message.
const maxHeaderListed = 200

// headerList lists a header's names for a message, each name shortened, and
// the list cut short with the number of columns when it is long.
func headerList(header []string) string {
	var b strings.Builder
	for i, h := range header {
		name := h
		if utf8.RuneCountInString(name) > maxQuoted {
			name = strings.TrimSuffix(strings.TrimPrefix(quote(name), `"`), `"...`) + "..."
		}
		if i > 0 && b.Len()+len(name) > maxHeaderListed {
			fmt.Fprintf(&b, ", ... (%d columns in all)", len(header))
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(name)
	}
	return b.String()
}
