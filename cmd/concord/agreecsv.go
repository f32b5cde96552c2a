package main

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/concord-labs/concord/agreement"
)

// voteColumns names the columns of a votes file that agree reads. seconds
// is optional; every other column of the file is ignored.
type voteColumns struct {
	item, labeller, label, seconds string
}

var defaultVoteColumns = voteColumns{item: "item", labeller: "labeller", label: "label", seconds: "seconds"}

// parseColumns reads --columns, "item=subject,labeller=rater,label=category",
// so a file exported elsewhere can be read without rewriting its header.
func parseColumns(s string) (voteColumns, error) {
	cols := defaultVoteColumns
	if strings.TrimSpace(s) == "" {
		return cols, nil
	}
	for i, part := range strings.Split(s, ",") {
		key, name, ok := strings.Cut(part, "=")
		key, name = strings.TrimSpace(key), strings.TrimSpace(name)
		if !ok || name == "" {
			return cols, fmt.Errorf("--columns: entry %d %q: want KEY=COLUMN", i+1, part)
		}
		switch key {
		case "item":
			cols.item = name
		case "labeller":
			cols.labeller = name
		case "label":
			cols.label = name
		case "seconds":
			cols.seconds = name
		default:
			return cols, fmt.Errorf("--columns: entry %d: unknown key %q (want item, labeller, label or seconds)", i+1, key)
		}
	}
	return cols, nil
}

// csvError is a bad-input error that points at a file, a line and, where
// there is one, a field (column name).
type csvError struct {
	file  string
	line  int
	field string
	msg   string
}

func (e *csvError) Error() string {
	if e.field == "" {
		return fmt.Sprintf("%s:%d: %s", e.file, e.line, e.msg)
	}
	return fmt.Sprintf("%s:%d: field %q: %s", e.file, e.line, e.field, e.msg)
}

// csvTable reads a CSV file with a header row, record by record. Header names
// match case-insensitively after trimming spaces and a UTF-8 byte order mark;
// encoding/csv already accepts CRLF line ends and skips blank lines.
type csvTable struct {
	file   string
	r      *csv.Reader
	header []string
	index  map[string]int // lower-cased column name -> position
}

func openCSVTable(file string, r io.Reader) (*csvTable, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	cr.FieldsPerRecord = -1 // checked here, to name the header's count in the error
	t := &csvTable{file: file, r: cr, index: make(map[string]int)}
	rec, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return nil, &csvError{file: file, line: 1, msg: "empty file, want a header row"}
	}
	if err != nil {
		return nil, t.readError(err)
	}
	for i, name := range rec {
		if i == 0 {
			name = strings.TrimPrefix(name, "\uFEFF")
		}
		name = strings.ToLower(strings.TrimSpace(name))
		t.header = append(t.header, name)
		if name == "" {
			continue
		}
		if at, dup := t.index[name]; dup {
			return nil, &csvError{file: file, line: 1, field: name, msg: fmt.Sprintf("column appears twice (columns %d and %d)", at+1, i+1)}
		}
		t.index[name] = i
	}
	return t, nil
}

// column returns the position of a named column, or -1 if it is optional
// and absent.
func (t *csvTable) column(name string, required bool) (int, error) {
	if i, ok := t.index[strings.ToLower(name)]; ok {
		return i, nil
	}
	if !required {
		return -1, nil
	}
	return 0, &csvError{file: t.file, line: 1, msg: fmt.Sprintf("header: missing column %q (header has %s)", name, strings.Join(t.header, ","))}
}

// next returns the next record and the line it starts on, or io.EOF. The
// record is reused by the following call.
func (t *csvTable) next() ([]string, int, error) {
	rec, err := t.r.Read()
	if err != nil {
		if errors.Is(err, io.EOF) {
			return nil, 0, io.EOF
		}
		return nil, 0, t.readError(err)
	}
	line, _ := t.r.FieldPos(0)
	if len(rec) != len(t.header) {
		return nil, line, &csvError{file: t.file, line: line, msg: fmt.Sprintf("%d fields, header has %d", len(rec), len(t.header))}
	}
	return rec, line, nil
}

// each calls fn on every record after the header, stopping at the first
// error.
func (t *csvTable) each(fn func(rec []string, line int) error) error {
	for {
		rec, line, err := t.next()
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return err
		}
		if err := fn(rec, line); err != nil {
			return err
		}
	}
}

// readError turns encoding/csv's syntax errors into the file:line form.
func (t *csvTable) readError(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		if pe.StartLine != pe.Line {
			return &csvError{file: t.file, line: pe.StartLine, msg: fmt.Sprintf("record runs to line %d, column %d: %v", pe.Line, pe.Column, pe.Err)}
		}
		return &csvError{file: t.file, line: pe.Line, msg: fmt.Sprintf("column %d: %v", pe.Column, pe.Err)}
	}
	return fmt.Errorf("read %s: %w", t.file, err)
}

// field returns a trimmed, required cell.
func (t *csvTable) field(rec []string, i, line int) (string, error) {
	s := strings.TrimSpace(rec[i])
	if s == "" {
		return "", &csvError{file: t.file, line: line, field: t.header[i], msg: "empty"}
	}
	return s, nil
}

// duplicateVote is a labeller's second vote on one item. Builder keeps the
// later vote (a changed mind is the labeller's latest word); agree warns
// with both lines so the lead can check the export.
type duplicateVote struct {
	Item, Labeller string
	Line, Earlier  int
}

// voteTable is a parsed votes file.
type voteTable struct {
	builder    *agreement.Builder
	votes      *agreement.Votes
	hasSeconds bool
	duplicates []duplicateVote
}

// readVotesCSV parses a votes file into dense votes. Seconds left empty (or
// the column missing) mean unknown.
func readVotesCSV(file string, r io.Reader, cols voteColumns) (*voteTable, error) {
	t, err := openCSVTable(file, r)
	if err != nil {
		return nil, err
	}
	var idx [3]int
	for i, name := range []string{cols.item, cols.labeller, cols.label} {
		if idx[i], err = t.column(name, true); err != nil {
			return nil, err
		}
	}
	secCol, _ := t.column(cols.seconds, false)
	vt := &voteTable{builder: agreement.NewBuilder(), hasSeconds: secCol >= 0}
	b := vt.builder
	// voteLine[v] is the line of vote v; Builder appends a vote only when
	// it is not a duplicate, so the vote index is the count so far.
	var voteLine []int32
	type pending struct{ item, labeller int }
	var dupKeys []pending
	var f [3]string
	err = t.each(func(rec []string, line int) error {
		var err error
		for i, c := range idx {
			if f[i], err = t.field(rec, c, line); err != nil {
				return err
			}
		}
		sec := -1.0
		if secCol >= 0 {
			if sec, err = parseSeconds(rec[secCol]); err != nil {
				return &csvError{file: file, line: line, field: t.header[secCol], msg: err.Error()}
			}
		}
		dup, err := b.Add(f[0], f[1], f[2], sec)
		if err != nil {
			return &csvError{file: file, line: line, msg: err.Error()}
		}
		if !dup {
			voteLine = append(voteLine, int32(line))
			return nil
		}
		it, _ := b.ItemID(f[0])
		lb, _ := b.LabellerID(f[1])
		vt.duplicates = append(vt.duplicates, duplicateVote{Item: f[0], Labeller: f[1], Line: line})
		dupKeys = append(dupKeys, pending{it, lb})
		return nil
	})
	if err != nil {
		return nil, err
	}
	vt.votes = b.Build()
	if len(dupKeys) > 0 {
		// One pass over the votes finds each repeated pair's first line; a
		// third vote then points at the second.
		first := make(map[pending]int, len(dupKeys))
		for _, k := range dupKeys {
			first[k] = 0
		}
		v := vt.votes
		for i := range v.Item {
			k := pending{int(v.Item[i]), int(v.Labeller[i])}
			if _, ok := first[k]; ok {
				first[k] = int(voteLine[i])
			}
		}
		for i, k := range dupKeys {
			vt.duplicates[i].Earlier = first[k]
			first[k] = vt.duplicates[i].Line
		}
	}
	return vt, nil
}

// parseSeconds reads the time a vote took; empty means unknown (-1).
func parseSeconds(s string) (float64, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return -1, nil
	}
	x, err := strconv.ParseFloat(s, 64)
	if err != nil || x < 0 || math.IsInf(x, 0) || math.IsNaN(x) {
		return 0, fmt.Errorf("%q is not a number of seconds >= 0", s)
	}
	return x, nil
}

// goldSet is a parsed gold file: item id -> class id. Gold items nobody
// voted on are left out (there is nothing to score) and counted; a gold
// label no vote used becomes a new class after the voted ones, so the
// labellers' confusion matrices have a row for it.
type goldSet struct {
	class         map[int]int
	unvoted       int
	firstUnvoted  int // line of the first unvoted gold item, for the warning
	addedClasses  []string
	classes       []string // the votes' classes followed by addedClasses
	numGoldInFile int
}

// readGoldCSV parses a gold file ("item,label") against the votes' names.
// An item given twice is an error even with the same label: a gold file
// is meant to be curated, and a repeat usually means a bad merge.
func readGoldCSV(file string, r io.Reader, vt *voteTable) (*goldSet, error) {
	t, err := openCSVTable(file, r)
	if err != nil {
		return nil, err
	}
	itemCol, err := t.column("item", true)
	if err != nil {
		return nil, err
	}
	labelCol, err := t.column("label", true)
	if err != nil {
		return nil, err
	}
	g := &goldSet{class: make(map[int]int), classes: vt.builder.ClassNames()}
	seen := make(map[string]int) // item name -> line
	err = t.each(func(rec []string, line int) error {
		item, err := t.field(rec, itemCol, line)
		if err != nil {
			return err
		}
		label, err := t.field(rec, labelCol, line)
		if err != nil {
			return err
		}
		if at, dup := seen[item]; dup {
			return &csvError{file: file, line: line, field: t.header[itemCol], msg: fmt.Sprintf("item %q already has a gold label on line %d", item, at)}
		}
		seen[item] = line
		g.numGoldInFile++
		it, ok := vt.builder.ItemID(item)
		if !ok {
			if g.unvoted == 0 {
				g.firstUnvoted = line
			}
			g.unvoted++
			return nil
		}
		c, ok := vt.builder.ClassID(label)
		if !ok {
			if c = slices.Index(g.classes, label); c < 0 {
				c = len(g.classes)
				g.classes = append(g.classes, label)
				g.addedClasses = append(g.addedClasses, label)
			}
		}
		g.class[it] = c
		return nil
	})
	if err != nil {
		return nil, err
	}
	return g, nil
}
