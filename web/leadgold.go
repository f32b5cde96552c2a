package web

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/concord-labs/concord/store"
)

// Gold CSV format (what the setup page documents):
//
//	item,label
//	1042,pet-bottle
//	belt-0007.jpg,aluminium-can
//	3fa9c2d1e0,glass
//
// One answer a line; the header line "item,label" is optional. item is the
// item id, its original file name, or 8 or more hex digits that start its
// SHA-256; label is a leaf key of the project's taxonomy. Blank lines are
// skipped; a later line for the same item wins.

// goldLine is one parsed row and the file line it came from.
type goldLine struct {
	Line int
	In   store.GoldInput
}

// goldError is a problem at one line and field of a gold file.
type goldError struct {
	Line  int
	Field string
	Msg   string
}

func (e *goldError) Error() string { return fmt.Sprintf("line %d, %s: %s", e.Line, e.Field, e.Msg) }

const maxGoldRows = 100_000

// parseGoldCSV reads a gold file. It stops at the first bad line: a fixed
// file is re-uploaded whole, and nothing is stored until all of it is good.
func parseGoldCSV(r io.Reader) ([]goldLine, error) {
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = -1
	cr.TrimLeadingSpace = true
	var out []goldLine
	for first := true; ; first = false {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				return nil, &goldError{Line: max(pe.Line, 1), Field: "csv", Msg: pe.Err.Error()}
			}
			return nil, &goldError{Line: 1, Field: "csv", Msg: err.Error()}
		}
		line, _ := cr.FieldPos(0)
		if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
			continue
		}
		if len(rec) != 2 {
			return nil, &goldError{Line: line, Field: "csv", Msg: fmt.Sprintf("want 2 fields (item,label), found %d", len(rec))}
		}
		item, label := strings.TrimSpace(rec[0]), strings.TrimSpace(rec[1])
		if first && strings.EqualFold(item, "item") && strings.EqualFold(label, "label") {
			continue
		}
		if item == "" {
			return nil, &goldError{Line: line, Field: "item", Msg: "empty"}
		}
		if label == "" {
			return nil, &goldError{Line: line, Field: "label", Msg: "empty"}
		}
		if len(out) == maxGoldRows {
			return nil, &goldError{Line: line, Field: "csv", Msg: fmt.Sprintf("more than %d answers; split the file", maxGoldRows)}
		}
		out = append(out, goldLine{Line: line, In: store.GoldInput{Item: item, Label: label}})
	}
	if len(out) == 0 {
		return nil, &goldError{Line: 1, Field: "csv", Msg: "no answers in the file"}
	}
	return out, nil
}
