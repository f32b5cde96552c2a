package taxonomy

import (
	"errors"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
)

func TestParseGood(t *testing.T) {
	tests := []struct {
		name string
		in   string
		want []Label
	}{
		{
			name: "key only, name defaults to key",
			in:   "glass\n",
			want: []Label{{Key: "glass", Name: "glass"}},
		},
		{
			name: "name and description, spaces around bars ignored",
			in:   "pet-bottle   |  PET bottle |clear drink bottle  \n",
			want: []Label{{Key: "pet-bottle", Name: "PET bottle", Description: "clear drink bottle"}},
		},
		{
			name: "empty description means none",
			in:   "glass | Glass |\n",
			want: []Label{{Key: "glass", Name: "Glass"}},
		},
		{
			name: "escapes",
			in:   `metal | Tin \| can | back\\slash and \| bar` + "\n",
			want: []Label{{Key: "metal", Name: "Tin | can", Description: `back\slash and | bar`}},
		},
		{
			name: "comments, blank lines, CRLF, BOM, no final newline",
			in:   "\uFEFF# header\r\n\r\nmaterial\r\n\t# comment indented by a tab\r\n \t \r\n  plastic",
			want: []Label{{Key: "material", Name: "material", Children: []Label{{Key: "plastic", Name: "plastic"}}}},
		},
		{
			name: "four-space unit, dedent by two levels, several roots",
			in:   "material\n    plastic\n        pet-bottle\nresidual-waste\n",
			want: []Label{
				{Key: "material", Name: "material", Children: []Label{
					{Key: "plastic", Name: "plastic", Children: []Label{{Key: "pet-bottle", Name: "pet-bottle"}}},
				}},
				{Key: "residual-waste", Name: "residual-waste"},
			},
		},
		{
			name: "hash inside text is text",
			in:   "glass | Glass #1 | see note # 2",
			want: []Label{{Key: "glass", Name: "Glass #1", Description: "see note # 2"}},
		},
		{
			name: "key charset",
			in:   "a0._-z\n9lives",
			want: []Label{{Key: "a0._-z", Name: "a0._-z"}, {Key: "9lives", Name: "9lives"}},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tx, err := ParseString(tc.in)
			if err != nil {
				t.Fatalf("ParseString: %v", err)
			}
			if diff := cmp.Diff(tc.want, tx.Labels()); diff != "" {
				t.Errorf("labels (-want +got):\n%s", diff)
			}
		})
	}
}

// TestParseErrors checks each kind of error, with its exact line, column
// and wording, as a lead would read it.
func TestParseErrors(t *testing.T) {
	small := Limits{MaxDepth: 3, MaxNodes: 4, MaxLineLen: 40, MaxErrors: 3}
	tests := []struct {
		name  string
		lim   Limits
		in    string
		field string
		want  []string
	}{
		{
			name:  "empty file",
			in:    "# only a comment\n\n",
			field: FieldFile,
			want:  []string{"empty taxonomy: no labels"},
		},
		{
			name:  "first label indented",
			in:    "  material\n",
			field: FieldIndent,
			want:  []string{"line 1, column 1: the first label must not be indented"},
		},
		{
			name:  "not a multiple of the unit",
			in:    "material\n  plastic\n     pet-bottle\n",
			field: FieldIndent,
			want:  []string{"line 3, column 6: indented by 5 spaces, not a multiple of 2 (the indentation unit set by line 2)"},
		},
		{
			name:  "jump of two levels",
			in:    "material\n  plastic\n      pet-bottle\n",
			field: FieldIndent,
			want:  []string{"line 3, column 7: indented 2 levels deeper than the label above; a label is at most one level below its parent"},
		},
		{
			name:  "tab in indentation",
			in:    "material\n\tplastic\n",
			field: FieldIndent,
			want:  []string{"line 2, column 1: tab in indentation; indent with spaces"},
		},
		{
			name:  "duplicate key names the first line",
			in:    "material\n  glass\n  paper\n# note\n  glass | Glass\n",
			field: FieldKey,
			want:  []string{`line 5, column 3: duplicate key "glass" (first on line 2)`},
		},
		{
			name:  "empty name",
			in:    "material\n  glass |  \n",
			field: FieldName,
			want:  []string{"line 2, column 10: empty name; leave out the '|' to use the key as the name"},
		},
		{
			name:  "empty name before a description",
			in:    "glass | | bottles",
			field: FieldName,
			want:  []string{"line 1, column 9: empty name; leave out the '|' to use the key as the name"},
		},
		{
			name:  "upper-case key",
			in:    "material\n  PET-bottle\n",
			field: FieldKey,
			want:  []string{`line 2, column 3: key "PET-bottle" has invalid character 'P'; keys use a-z, 0-9, '-', '_' and '.'`},
		},
		{
			name:  "space in key hints at a missing bar",
			in:    "pet bottle\n",
			field: FieldKey,
			want:  []string{`line 1, column 4: key "pet bottle" has invalid character ' '; keys use a-z, 0-9, '-', '_' and '.' (is a '|' missing before the display name?)`},
		},
		{
			name:  "key starting with a dash",
			in:    "-glass\n",
			field: FieldKey,
			want:  []string{`line 1, column 1: key "-glass" must start with a letter or digit`},
		},
		{
			name:  "empty key",
			in:    "| Glass\n",
			field: FieldKey,
			want:  []string{"line 1, column 1: empty key"},
		},
		{
			name:  "key too long",
			in:    strings.Repeat("k", MaxKeyLen+1) + "\n",
			field: FieldKey,
			want:  []string{`line 1, column 65: key "` + strings.Repeat("k", MaxKeyLen+1) + `" is 65 bytes long, the limit is 64`},
		},
		{
			name:  "too many bars",
			in:    "glass | Glass | bottles | jars\n",
			field: FieldLine,
			want:  []string{`line 1, column 25: too many '|' separators; a line is key | name | description, and \| writes a '|' inside text`},
		},
		{
			name:  "unknown escape",
			in:    `glass | Gl\ass`,
			field: FieldName,
			want:  []string{`line 1, column 11: unknown escape; inside text write \| for '|' and \\ for '\'`},
		},
		{
			name:  "control character in description",
			in:    "glass | Glass | a\x01b\n",
			field: FieldDescription,
			want:  []string{`line 1, column 18: description holds control character '\x01'`},
		},
		{
			name:  "invalid UTF-8 in name",
			in:    "glass | Gl\xffass\n",
			field: FieldName,
			want:  []string{`line 1, column 11: name is not valid UTF-8`},
		},
		{
			name:  "too deep",
			lim:   small,
			in:    "a\n b\n  c\n   d\n",
			field: FieldIndent,
			want:  []string{`line 4, column 4: too deep: "d" is on level 4, the limit is 3 levels`},
		},
		{
			name:  "too many labels",
			lim:   small,
			in:    "a\nb\nc\nd\ne\nf\n",
			field: FieldFile,
			want:  []string{"line 5: too many labels: the limit is 4"},
		},
		{
			name:  "line too long",
			lim:   small,
			in:    "a\n" + strings.Repeat("b", 41) + "\nc\n",
			field: FieldLine,
			want:  []string{"line 2: line is longer than 40 bytes"},
		},
		{
			name:  "long comment line is too long as well",
			lim:   small,
			in:    "a\n# " + strings.Repeat("x", 5000) + "\nc\n",
			field: FieldLine,
			want:  []string{"line 2: line is longer than 40 bytes"},
		},
		{
			name:  "line that grows past the limit once formatted",
			lim:   small,
			in:    "a\n b\n  c|" + strings.Repeat("x", 33) + "\n",
			field: FieldLine,
			want:  []string{`line 3: label "c" is 41 bytes long as Format writes it, over the limit of 40`},
		},
		{
			name:  "error limit stops parsing",
			lim:   small,
			in:    "A\nB\nC\nD\nE\n",
			field: FieldKey,
			want: []string{
				`line 1, column 1: key "A" has invalid character 'A'; keys use a-z, 0-9, '-', '_' and '.'`,
				`line 2, column 1: key "B" has invalid character 'B'; keys use a-z, 0-9, '-', '_' and '.'`,
				`line 3, column 1: key "C" has invalid character 'C'; keys use a-z, 0-9, '-', '_' and '.'`,
				`line 3: too many errors; stopped after 3`,
			},
		},
		{
			name:  "several problems at once, one bad parent does not spoil its children",
			in:    "material\n  plastic\n   metal\n    aluminium-can\n  Paper\n    cardboard\n  plastic\n",
			field: FieldIndent,
			want: []string{
				"line 3, column 4: indented by 3 spaces, not a multiple of 2 (the indentation unit set by line 2)",
				`line 5, column 3: key "Paper" has invalid character 'P'; keys use a-z, 0-9, '-', '_' and '.'`,
				`line 7, column 3: duplicate key "plastic" (first on line 2)`,
			},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tx, err := tc.lim.Parse(strings.NewReader(tc.in))
			if err == nil {
				t.Fatalf("parsed without error:\n%s", tx)
			}
			var list ErrorList
			if !errors.As(err, &list) {
				t.Fatalf("error %T is not an ErrorList: %v", err, err)
			}
			var got []string
			for _, e := range list {
				got = append(got, e.Error())
			}
			if diff := cmp.Diff(tc.want, got); diff != "" {
				t.Errorf("errors (-want +got):\n%s", diff)
			}
			var first *ParseError
			if !errors.As(err, &first) || first.Field != tc.field {
				t.Errorf("first error field = %+v, want %q", first, tc.field)
			}
		})
	}
}

func TestParseFileNamesTheFile(t *testing.T) {
	_, err := ParseFile("../testdata/taxonomy/dup-key.txt")
	want := `../testdata/taxonomy/dup-key.txt: line 7, column 3: duplicate key "glass" (first on line 4)`
	if err == nil || err.Error() != want {
		t.Errorf("ParseFile error = %v, want %s", err, want)
	}
	_, err = ParseFile("../testdata/taxonomy/bad-indent.txt")
	want = "../testdata/taxonomy/bad-indent.txt: line 5, column 4: indented by 3 spaces, not a multiple of 2 (the indentation unit set by line 3)\n" +
		"../testdata/taxonomy/bad-indent.txt: line 7, column 7: indented 2 levels deeper than the label above; a label is at most one level below its parent"
	if err == nil || err.Error() != want {
		t.Errorf("ParseFile error = %v, want %s", err, want)
	}
	_, err = ParseFile("../testdata/taxonomy/missing.txt")
	if err == nil || !strings.Contains(err.Error(), "missing.txt") {
		t.Errorf("ParseFile of a missing file = %v, want an error naming the file", err)
	}
}
