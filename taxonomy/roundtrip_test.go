package taxonomy

import (
	"encoding/json"
	"errors"
	"os"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// checkRoundTrip asserts the format's promises for tx: Format's output
// parses back to an equal tree, and formatting that again gives the same
// bytes.
func checkRoundTrip(t *testing.T, tx *Taxonomy) {
	t.Helper()
	text := tx.String()
	back, err := ParseString(text)
	if err != nil {
		t.Fatalf("formatted text does not parse: %v\n%s", err, text)
	}
	if !back.Equal(tx) {
		t.Fatalf("Parse(Format(t)) differs from t:\n%s", cmp.Diff(tx.Labels(), back.Labels()))
	}
	if again := back.String(); again != text {
		t.Fatalf("Format is not stable:\nfirst:\n%s\nsecond:\n%s", text, again)
	}
}

func TestFormatCanonical(t *testing.T) {
	in := "# comment\n" +
		"material|Material\n" +
		"    plastic | plastic\n" +
		"        pet-bottle |  PET bottle  |  clear \\| tinted  \n" +
		"\n" +
		"    glass | glass | bottles and jars\n" +
		"residual-waste |Residual waste|\n" +
		"odd | back\\\\slash\n"
	want := "material | Material\n" +
		"  plastic\n" +
		"    pet-bottle | PET bottle | clear \\| tinted\n" +
		"  glass | glass | bottles and jars\n" +
		"residual-waste | Residual waste\n" +
		"odd | back\\\\slash\n"
	tx, err := ParseString(in)
	if err != nil {
		t.Fatal(err)
	}
	if got := tx.String(); got != want {
		t.Errorf("Format:\n%s\nwant:\n%s", got, want)
	}
	checkRoundTrip(t, tx)
}

func TestRecyclingFileIsCanonicalApartFromComments(t *testing.T) {
	raw, err := os.ReadFile("../testdata/taxonomy/recycling.txt")
	if err != nil {
		t.Fatal(err)
	}
	var body []string
	for _, line := range strings.SplitAfter(string(raw), "\n") {
		if !strings.HasPrefix(line, "#") && strings.TrimSpace(line) != "" {
			body = append(body, line)
		}
	}
	tx := loadRecycling(t)
	if diff := cmp.Diff(strings.Join(body, ""), tx.String()); diff != "" {
		t.Errorf("recycling.txt without comments differs from Format's output (-file +format):\n%s", diff)
	}
	checkRoundTrip(t, tx)
}

func TestNewFromLabels(t *testing.T) {
	tx, err := New([]Label{
		{Key: "material", Children: []Label{
			{Key: "metal", Name: "Metal | scrap", Description: `cans \ tins`},
		}},
		{Key: "residual-waste", Description: "no name, so the key is the name"},
	})
	if err != nil {
		t.Fatal(err)
	}
	want := "material\n" +
		"  metal | Metal \\| scrap | cans \\\\ tins\n" +
		"residual-waste | residual-waste | no name, so the key is the name\n"
	if got := tx.String(); got != want {
		t.Errorf("Format:\n%s\nwant:\n%s", got, want)
	}
	checkRoundTrip(t, tx)
}

func TestNewRejects(t *testing.T) {
	_, err := New([]Label{
		{Key: "material", Children: []Label{
			{Key: "metal", Name: " Metal"},
			{Key: "glass", Description: "line\nbreak"},
			{Key: "material"},
		}},
	})
	want := "label [0].children[0]: name has leading or trailing white space\n" +
		"label [0].children[1]: description holds control character '\\n'\n" +
		`label [0].children[2]: duplicate key "material" (first on [0])`
	if err == nil || err.Error() != want {
		t.Errorf("New error:\n%v\nwant:\n%s", err, want)
	}
	if _, err := New(nil); err == nil || err.Error() != "empty taxonomy: no labels" {
		t.Errorf("New(nil) error = %v", err)
	}
}

func TestJSON(t *testing.T) {
	tx, err := ParseString("material | Material\n  glass | Glass | bottles \\| jars\nresidual-waste\n")
	if err != nil {
		t.Fatal(err)
	}
	got, err := json.Marshal(tx)
	if err != nil {
		t.Fatal(err)
	}
	want := `[{"key":"material","name":"Material","children":[{"key":"glass","name":"Glass","description":"bottles | jars"}]},{"key":"residual-waste","name":"residual-waste"}]`
	if string(got) != want {
		t.Errorf("json.Marshal:\n%s\nwant:\n%s", got, want)
	}
	var back Taxonomy
	if err := json.Unmarshal(got, &back); err != nil {
		t.Fatal(err)
	}
	if !back.Equal(tx) {
		t.Errorf("JSON round trip differs:\n%s", cmp.Diff(tx.Labels(), back.Labels()))
	}

	rec := loadRecycling(t)
	data, err := json.Marshal(rec)
	if err != nil {
		t.Fatal(err)
	}
	var recBack Taxonomy
	if err := json.Unmarshal(data, &recBack); err != nil {
		t.Fatal(err)
	}
	if !recBack.Equal(rec) || recBack.String() != rec.String() {
		t.Error("recycling taxonomy changed through JSON")
	}
}

func TestJSONErrors(t *testing.T) {
	tests := []struct {
		name string
		in   string
		want string
	}{
		{"missing name means the key, empty name is an error", `[{"key":"glass","name":""}]`,
			"label [0]: empty name; leave out the '|' to use the key as the name"},
		{"bad key deep down", `[{"key":"material","children":[{"key":"metal","children":[{"key":"Steel can"}]}]}]`,
			`label [0].children[0].children[0]: key "Steel can" has invalid character 'S'; keys use a-z, 0-9, '-', '_' and '.'`},
		{"duplicate", `[{"key":"glass"},{"key":"paper","children":[{"key":"glass"}]}]`,
			`label [1].children[0]: duplicate key "glass" (first on [0])`},
		{"unknown field", `[{"key":"glass","colour":"green"}]`,
			`line 1, column 35: json: unknown field "colour"`},
		{"syntax error on line 2", "[{\"key\":\"glass\"},\n {\"key\" \"paper\"}]",
			"line 2, column 9: invalid character '\"' after object key"},
		{"wrong type", `[{"key":7}]`,
			"line 1, column 9: json: cannot unmarshal number into Go struct field jsonLabel.key of type string"},
		{"empty", `[]`, "empty taxonomy: no labels"},
		{"trailing data", `[{"key":"glass"}] [`, "line 1, column 19: unexpected data after the top-level array"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := DefaultLimits().ParseJSON([]byte(tc.in))
			var list ErrorList
			if !errors.As(err, &list) {
				t.Fatalf("error %T %v is not an ErrorList", err, err)
			}
			if err.Error() != tc.want {
				t.Errorf("error:\n%v\nwant:\n%s", err, tc.want)
			}
		})
	}
	// json.Unmarshal checks the syntax itself; what it hands over is
	// checked as ParseJSON does.
	var tx Taxonomy
	err := json.Unmarshal([]byte(tests[2].in), &tx)
	if err == nil || err.Error() != tests[2].want {
		t.Errorf("json.Unmarshal error = %v, want %s", err, tests[2].want)
	}
}
