package main

import (
	"bytes"
	"errors"
	"os"
	"strings"
	"testing"
)

func TestReadVotesCSVHeaderForms(t *testing.T) {
	// A byte order mark, CRLF line ends, a blank line, quoted fields, upper
	// case names and a different column order all read the same.
	f, err := os.Open("../../testdata/agree/bom_crlf.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	vt, err := readVotesCSV("bom_crlf.csv", f, defaultVoteColumns)
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(vt.builder.ClassNames(), "|"); got != "glass|PET bottle" {
		t.Errorf("classes %q", got)
	}
	if got := strings.Join(vt.builder.ItemNames(), "|"); got != "belt-0001|belt-0002" {
		t.Errorf("items %q", got)
	}
	if vt.votes.Len() != 4 || vt.hasSeconds {
		t.Errorf("%d votes, seconds %v; want 4, false", vt.votes.Len(), vt.hasSeconds)
	}
	for i, s := range vt.votes.Seconds {
		if s != -1 {
			t.Errorf("vote %d: seconds %g, want -1 (unknown)", i, s)
		}
	}
}

func TestParseColumns(t *testing.T) {
	cols, err := parseColumns("item=subject, labeller=rater,label=category")
	if err != nil || cols != (voteColumns{"subject", "rater", "category", "seconds"}) {
		t.Errorf("got %+v, %v", cols, err)
	}
	for in, want := range map[string]string{
		"item":         `--columns: entry 1 "item": want KEY=COLUMN`,
		"item=a,who=b": `--columns: entry 2: unknown key "who" (want item, labeller, label or seconds)`,
		"label=":       `--columns: entry 1 "label=": want KEY=COLUMN`,
	} {
		if _, err := parseColumns(in); err == nil || err.Error() != want {
			t.Errorf("parseColumns(%q): %v, want %s", in, err, want)
		}
	}
}

// checkCSVError fails unless err is nil or a csvError with a line, so every
// bad input the fuzzers find is reported the way a lead can act on.
func checkCSVError(t *testing.T, err error) {
	t.Helper()
	if err == nil {
		return
	}
	var ce *csvError
	if !errors.As(err, &ce) || ce.line < 1 || !strings.HasPrefix(err.Error(), ce.file+":") {
		t.Fatalf("error without file and line: %v", err)
	}
}

func FuzzVotesCSV(f *testing.F) {
	for _, name := range []string{"votes.csv", "bom_crlf.csv", "duplicate.csv", "bad_quote.csv", "field_count.csv", "bad_seconds.csv"} {
		b, err := os.ReadFile("../../testdata/agree/" + name)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	f.Add([]byte("item,labeller,label\n\"a\"\"b\",x,y\n"))
	f.Add([]byte("label,item,labeller,seconds\nx,a,b,1e400\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		vt, err := readVotesCSV("fuzz.csv", bytes.NewReader(data), defaultVoteColumns)
		checkCSVError(t, err)
		if err != nil {
			return
		}
		v := vt.votes
		if err := v.Validate(); err != nil {
			t.Fatalf("built votes invalid: %v", err)
		}
		for _, d := range vt.duplicates {
			if d.Earlier < 2 || d.Earlier >= d.Line {
				t.Fatalf("duplicate on line %d points at line %d", d.Line, d.Earlier)
			}
		}
		for _, s := range v.Seconds {
			if !(s == -1 || s >= 0) {
				t.Fatalf("seconds %g", s)
			}
		}
	})
}

func FuzzGoldCSV(f *testing.F) {
	for _, name := range []string{"gold.csv", "gold_extra.csv", "gold_repeated.csv", "gold_empty_label.csv"} {
		b, err := os.ReadFile("../../testdata/agree/" + name)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	votes, err := os.ReadFile("../../testdata/agree/votes.csv")
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		vt, err := readVotesCSV("votes.csv", bytes.NewReader(votes), defaultVoteColumns)
		if err != nil {
			t.Fatal(err)
		}
		k := vt.votes.NumClasses
		g, err := readGoldCSV("fuzz.csv", bytes.NewReader(data), vt)
		checkCSVError(t, err)
		if err != nil {
			return
		}
		if len(g.classes) != k+len(g.addedClasses) {
			t.Fatalf("%d classes, want %d + %d added", len(g.classes), k, len(g.addedClasses))
		}
		for item, c := range g.class {
			if item < 0 || item >= vt.votes.NumItems || c < 0 || c >= len(g.classes) {
				t.Fatalf("gold %d -> %d out of range", item, c)
			}
		}
	})
}
