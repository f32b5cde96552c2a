package agreement

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"testing"
)

// referenceDir is the repository's copy of the shared reference folder;
// testdata/reference/README.md names each file's source.
const referenceDir = "../testdata/reference"

// referenceCSV is one reference file read whole: its header and rows, with
// enough bookkeeping to name file, line and field in a failure.
type referenceCSV struct {
	name   string
	header []string
	rows   [][]string
	lines  []int
}

func loadReference(t testing.TB, name string) *referenceCSV {
	t.Helper()
	f, err := os.Open(filepath.Join(referenceDir, name))
	if err != nil {
		t.Fatalf("reference data: %v", err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = 0
	ref := &referenceCSV{name: name}
	for {
		rec, err := r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("reference data %s: %v", name, err)
		}
		line, _ := r.FieldPos(0)
		if ref.header == nil {
			ref.header = rec
			continue
		}
		ref.rows = append(ref.rows, rec)
		ref.lines = append(ref.lines, line)
	}
	return ref
}

// column returns the index of a header field.
func (r *referenceCSV) column(t testing.TB, field string) int {
	t.Helper()
	i := slices.Index(r.header, field)
	if i < 0 {
		t.Fatalf("reference data %s: no column %q in header %v", r.name, field, r.header)
	}
	return i
}

// number parses row i's field; an empty field is NaN.
func (r *referenceCSV) number(t testing.TB, i int, field string) float64 {
	t.Helper()
	s := r.rows[i][r.column(t, field)]
	if s == "" {
		return math.NaN()
	}
	x, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("%s", r.fieldError(i, field, err))
	}
	return x
}

func (r *referenceCSV) integer(t testing.TB, i int, field string) int {
	t.Helper()
	n, err := strconv.Atoi(r.rows[i][r.column(t, field)])
	if err != nil {
		t.Fatalf("%s", r.fieldError(i, field, err))
	}
	return n
}

func (r *referenceCSV) fieldError(i int, field string, err error) error {
	return fmt.Errorf("reference data %s line %d field %s: %w", r.name, r.lines[i], field, err)
}

// countsTable reads an items x classes table from the named columns.
func countsTable(t testing.TB, name string, fields ...string) *ItemCounts {
	t.Helper()
	r := loadReference(t, name)
	rows := make([][]int, len(r.rows))
	for i := range r.rows {
		for _, f := range fields {
			rows[i] = append(rows[i], r.integer(t, i, f))
		}
	}
	c, err := CountsFromTable(rows)
	if err != nil {
		t.Fatalf("reference data %s: %v", name, err)
	}
	return c
}

// longVotes reads a unit, rater, value file as dense votes. Units are the
// files' 1-based integers, so item = unit - 1 and units without any value
// still count as items. Values are 1-based categories: class = value - 1 and
// the declared scale runs 1..classes. Raters get ids in order of first
// appearance; the returned names map ids back to the file.
func longVotes(t testing.TB, name, unitField, raterField, valueField string, classes int) (*Votes, []string) {
	t.Helper()
	r := loadReference(t, name)
	raters := map[string]int32{}
	var raterNames []string
	v := &Votes{NumClasses: classes}
	for i, row := range r.rows {
		unit := r.integer(t, i, unitField)
		if unit < 1 {
			t.Fatalf("%s", r.fieldError(i, unitField, fmt.Errorf("unit %d, want >= 1", unit)))
		}
		rt := row[r.column(t, raterField)]
		if _, ok := raters[rt]; !ok {
			raters[rt] = int32(len(raters))
			raterNames = append(raterNames, rt)
		}
		val := r.integer(t, i, valueField)
		if val < 1 || val > classes {
			t.Fatalf("%s", r.fieldError(i, valueField, fmt.Errorf("value %d outside 1..%d", val, classes)))
		}
		v.NumItems = max(v.NumItems, unit)
		v.Item = append(v.Item, int32(unit-1))
		v.Labeller = append(v.Labeller, raters[rt])
		v.Label = append(v.Label, int32(val-1))
	}
	v.NumLabellers = len(raters)
	return v, raterNames
}

// near fails the test unless got is within tol of want.
func near(t testing.TB, what string, got, want, tol float64) {
	t.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol {
		t.Errorf("%s = %.10g, want %.10g (within %g)", what, got, want, tol)
	}
}
