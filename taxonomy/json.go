package taxonomy

import (
	"bytes"
	"encoding/json"
	"errors"
	"io"
)

// jsonLabel is the JSON form of a label. Name is a pointer so that a missing
// name (meaning the key) differs from an empty one (an error, as in text).
type jsonLabel struct {
	Key         string      `json:"key"`
	Name        *string     `json:"name,omitempty"`
	Description string      `json:"description,omitempty"`
	Children    []jsonLabel `json:"children,omitempty"`
}

// MarshalJSON writes the roots as an array of nested objects
// {"key", "name", "description", "children"}; name is always written,
// description and children only when not empty.
func (t Taxonomy) MarshalJSON() ([]byte, error) {
	roots := mapTree(&t, t.roots, func(n *Node, children []jsonLabel) jsonLabel {
		return jsonLabel{Key: n.Key, Name: &n.Name, Description: n.Description, Children: children}
	})
	if roots == nil {
		roots = []jsonLabel{}
	}
	return json.Marshal(roots)
}

// UnmarshalJSON reads the form MarshalJSON writes, under the default limits
// and with the same checks as Parse. Unknown fields are errors.
func (t *Taxonomy) UnmarshalJSON(data []byte) error {
	u, err := DefaultLimits().ParseJSON(data)
	if err != nil {
		return err
	}
	*t = *u
	return nil
}

// ParseJSON reads the JSON form under l. Problems come back as an ErrorList;
// an error in a label names it by position, e.g. "[0].children[2]", and a
// syntax error by line and column.
func (l Limits) ParseJSON(data []byte) (*Taxonomy, error) {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var roots []jsonLabel
	if err := dec.Decode(&roots); err != nil {
		return nil, ErrorList{jsonError(data, dec.InputOffset(), err)}
	}
	end := dec.InputOffset()
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		end += int64(len(data[end:]) - len(bytes.TrimLeft(data[end:], " \t\r\n")))
		return nil, ErrorList{jsonError(data, end, errors.New("unexpected data after the top-level array"))}
	}
	b := newBuilder(l, "")
	walkLabels(b, roots, func(j jsonLabel) (entry, []jsonLabel) {
		e := entry{key: j.Key, desc: j.Description}
		if j.Name != nil {
			e.name, e.nameSet = *j.Name, true
		}
		return e, j.Children
	})
	return b.finish()
}

// jsonError turns a decoding error into a ParseError at the line and column
// of the byte at offset, or of the offending byte the error itself names.
func jsonError(data []byte, offset int64, err error) *ParseError {
	var syn *json.SyntaxError
	var typ *json.UnmarshalTypeError
	switch {
	case errors.As(err, &syn):
		offset = syn.Offset - 1 // Offset counts the bytes read, the bad one included
	case errors.As(err, &typ):
		offset = typ.Offset - 1
	}
	offset = min(max(offset, 0), int64(len(data)))
	before := data[:offset]
	line := bytes.Count(before, []byte("\n")) + 1
	col := len(before) - bytes.LastIndexByte(before, '\n')
	return &ParseError{Line: line, Column: col, Field: FieldJSON, Msg: err.Error()}
}
