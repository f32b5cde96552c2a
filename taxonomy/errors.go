package taxonomy

import (
	"fmt"
	"strings"
)

// Field names used in ParseError.Field.
const (
	FieldIndent      = "indent"
	FieldKey         = "key"
	FieldName        = "name"
	FieldDescription = "description"
	FieldLine        = "line"
	FieldFile        = "file"
	FieldJSON        = "json"
)

// ParseError is one problem in a taxonomy file or JSON document.
type ParseError struct {
	File   string // file name, when known (ParseFile sets it)
	Line   int    // 1-based line in the text file; 0 when not from text
	Column int    // 1-based column, in characters for text and bytes for JSON; 0 when the whole line is meant
	Label  string // position in a JSON document, e.g. "[0].children[2]"; "" for text
	Field  string // one of the Field* constants
	Msg    string
}

func (e *ParseError) Error() string {
	var b strings.Builder
	if e.File != "" {
		b.WriteString(e.File)
		b.WriteString(": ")
	}
	switch {
	case e.Line > 0 && e.Column > 0:
		fmt.Fprintf(&b, "line %d, column %d: ", e.Line, e.Column)
	case e.Line > 0:
		fmt.Fprintf(&b, "line %d: ", e.Line)
	case e.Label != "":
		fmt.Fprintf(&b, "label %s: ", e.Label)
	}
	b.WriteString(e.Msg)
	return b.String()
}

// ErrorList holds every problem found in one input, in input order. Parsing
// returns it (never a bare *ParseError) so a lead sees all problems at once;
// errors.As finds the individual *ParseError values too.
type ErrorList []*ParseError

func (l ErrorList) Error() string {
	msgs := make([]string, len(l))
	for i, e := range l {
		msgs[i] = e.Error()
	}
	return strings.Join(msgs, "\n")
}

// Unwrap lets errors.As and errors.Is look at each *ParseError.
func (l ErrorList) Unwrap() []error {
	errs := make([]error, len(l))
	for i, e := range l {
		errs[i] = e
	}
	return errs
}

// where says where an entry came from: a line and columns in a text file, or
// a path in a JSON document.
type where struct {
	line    int
	keyCol  int
	nameCol int
	descCol int
	label   string
}

// describe names the place for "(first on line 3)" style notes.
func (w where) describe() string {
	if w.line > 0 {
		return fmt.Sprintf("line %d", w.line)
	}
	return w.label
}

// collector gathers errors up to a limit; once full, it adds a closing note
// and tells the caller to stop.
type collector struct {
	file string
	max  int
	list ErrorList
	full bool
}

// add records e and reports whether there is room for more.
func (c *collector) add(at where, col int, field, format string, args ...any) bool {
	if c.full {
		return false
	}
	e := &ParseError{File: c.file, Line: at.line, Label: at.label, Field: field, Msg: fmt.Sprintf(format, args...)}
	if at.line > 0 {
		e.Column = col
	}
	c.list = append(c.list, e)
	if len(c.list) >= c.max {
		c.full = true
		c.list = append(c.list, &ParseError{File: c.file, Line: at.line, Label: at.label, Field: field,
			Msg: fmt.Sprintf("too many errors; stopped after %d", c.max)})
		return false
	}
	return true
}

func (c *collector) err() error {
	if len(c.list) == 0 {
		return nil
	}
	return c.list
}
