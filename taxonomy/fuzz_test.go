package taxonomy

import (
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func FuzzParse(f *testing.F) {
	files, _ := filepath.Glob("../testdata/taxonomy/*.txt")
	for _, name := range files {
		data, err := os.ReadFile(name)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(string(data))
	}
	for _, s := range []string{
		"", "a", "a\n b\n  c\n", "a | A | d", `a | \| | \\`, "a\n\tb", "a\n   b\n  c\n    d",
		"a|", "a||", "a | b | c | d", "\uFEFFa\r\n", "a | \xff", "a\n b\n   c",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		tx, err := ParseString(in)
		if err != nil {
			var list ErrorList
			if !errors.As(err, &list) || len(list) == 0 {
				t.Fatalf("error %T %v is not a non-empty ErrorList", err, err)
			}
			for _, e := range list {
				if e.Line <= 0 && e.Field != FieldFile {
					t.Fatalf("error without a line: %v", e)
				}
			}
			return
		}
		checkRoundTrip(t, tx)
		data, err := json.Marshal(tx)
		if err != nil {
			t.Fatal(err)
		}
		back, err := DefaultLimits().ParseJSON(data)
		if err != nil {
			t.Fatalf("JSON of a parsed taxonomy does not read back: %v\n%s", err, data)
		}
		if !back.Equal(tx) {
			t.Fatalf("JSON round trip changed the taxonomy:\n%s\n%s", tx, back)
		}
		if !strings.HasSuffix(tx.String(), "\n") {
			t.Fatal("formatted text does not end in a newline")
		}
	})
}

// FuzzParseJSON checks that whatever the JSON reader accepts can be written
// as text and read back unchanged, so the two forms accept the same trees.
func FuzzParseJSON(f *testing.F) {
	for _, s := range []string{
		`[{"key":"material","name":"Material","children":[{"key":"glass","description":"jars | bottles"}]}]`,
		`[{"key":"a","name":" a"}]`, `[{"key":"a","name":"x\\y"}]`, `[{"key":"a","description":"\u2028"}]`,
		`[{"key":"a","children":[{"key":"b","children":[{"key":"c"}]}]},{"key":"d"}]`, `[]`, `null`,
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		tx, err := DefaultLimits().ParseJSON([]byte(in))
		if err != nil {
			return
		}
		checkRoundTrip(t, tx)
	})
}
