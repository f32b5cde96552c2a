package dataset_test

import (
	"strings"
	"testing"

	"github.com/concord-labs/concord/dataset"
)

func TestParseManifestErrors(t *testing.T) {
	cases := []struct{ name, csv, want string }{
		{"no path column", "group\nx\n", "m.csv:1: no path column"},
		{"unknown column", "path,grup\na.png,x\n", `m.csv:1: column 2: unknown column "grup"`},
		{"twice", "path,path\na,b\n", `m.csv:1: column 2: column "path" given twice`},
		{"empty path", "path,group\n,x\n", "m.csv:2: path: empty"},
		{"dot-dot", "path\na.png\nsub/../../x.png\n", `m.csv:3: path "sub/../../x.png": leads outside`},
		{"absolute", "path\n/etc/passwd\n", `m.csv:2: path "/etc/passwd": absolute paths are refused`},
		{"wrong field count", "path,group\na.png\n", "m.csv: record on line 2: wrong number of fields"},
		{"long group", "path,group\na.png," + strings.Repeat("g", 201) + "\n", "m.csv:2: group: longer than 200 bytes"},
		{"empty file", "", "m.csv: empty manifest"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := dataset.ParseManifest(strings.NewReader(c.csv), "m.csv")
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want it to contain %q", err, c.want)
			}
		})
	}
	rows, err := dataset.ParseManifest(strings.NewReader("\ufeffPath, Prior_Label\nbelt/a.png,glass\n"), "m.csv")
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 1 || rows[0] != (dataset.ManifestRow{Line: 2, Path: "belt/a.png", PriorLabel: "glass"}) {
		t.Errorf("rows %+v", rows)
	}
}

// FuzzManifest checks that no input makes the parser panic and that no
// accepted path leads outside the manifest's folder.
func FuzzManifest(f *testing.F) {
	f.Add("path,group,prior_label\na.png,g1,glass\n")
	f.Add("path\n../x\n")
	f.Add("path\n\"a\nb\",\n")
	f.Add("\ufeffpath\r\n/abs\r\n")
	f.Fuzz(func(t *testing.T, s string) {
		rows, err := dataset.ParseManifest(strings.NewReader(s), "m.csv")
		if err != nil {
			return
		}
		for _, r := range rows {
			if r.Path == "" || strings.HasPrefix(r.Path, "/") || r.Path == ".." || strings.HasPrefix(r.Path, "../") {
				t.Fatalf("accepted path %q", r.Path)
			}
		}
	})
}
