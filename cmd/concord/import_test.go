package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/concord-labs/concord/store"
)

// cliProject makes a project with a two-level recycling taxonomy straight
// in the database.
func cliProject(t *testing.T, slug string) (*store.Store, store.Project) {
	t.Helper()
	ctx := context.Background()
	s := testDB.Open(t)
	p, err := s.CreateProject(ctx, store.Project{Slug: slug, Name: "Sorting line " + slug, ReleaseSeed: 7})
	if err != nil {
		t.Fatal(err)
	}
	// Other tests of this package list every project; leave none behind.
	t.Cleanup(func() { s.Pool().Exec(context.Background(), `DELETE FROM projects WHERE id = $1`, p.ID) })
	err = s.ReplaceTaxonomy(ctx, p.ID, []store.LabelInput{
		{Key: "plastic", Parent: -1}, {Key: "pet-bottle", Name: "PET bottle", Parent: 0},
		{Key: "metal", Parent: -1}, {Key: "aluminium-can", Name: "Aluminium can", Parent: 2},
	})
	if err != nil {
		t.Fatal(err)
	}
	return s, p
}

// beltPNG draws a belt frame with one object whose place and colour
// depend on k, so different k give clearly different pictures.
func beltPNG(t *testing.T, k int) []byte {
	t.Helper()
	img := image.NewRGBA(image.Rect(0, 0, 64, 64))
	for y := range 64 {
		for x := range 64 {
			v := uint8(60 + x)
			if (y/8)%2 == 0 {
				v += 10
			}
			img.Set(x, y, color.RGBA{v, v, v, 255})
		}
	}
	ox, oy := (k*17)%44, (k*29)%44
	c := color.RGBA{uint8(40 * (k % 6)), uint8(200 - 30*(k%5)), uint8(25 * (k % 9)), 255}
	for y := oy; y < oy+6+k%14; y++ {
		for x := ox; x < ox+20-k%9; x++ {
			img.Set(x, y, c)
		}
	}
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func writeTestFile(t *testing.T, path string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestImportCommand(t *testing.T) {
	_, _ = cliProject(t, "import-cli")
	dir, data := t.TempDir(), t.TempDir()
	for k := range 12 {
		writeTestFile(t, filepath.Join(dir, fmt.Sprintf("cam1/%03d.png", k)), beltPNG(t, k))
	}
	writeTestFile(t, filepath.Join(dir, "cam2/copy.png"), beltPNG(t, 3))
	writeTestFile(t, filepath.Join(dir, "cam2/bad.jpg"), []byte("\xff\xd8\xff\xe0 not really a jpeg"))

	r := runConcord(t, "", []string{"import", "--project", "import-cli", "--data", data, dir})
	if r.err != nil {
		t.Fatalf("import: %v\n%s%s", r.err, r.stdout, r.stderr)
	}
	for _, want := range []string{
		"skipped cam2/bad.jpg: not a readable JPEG, PNG, GIF or WebP image",
		"duplicate cam2/copy.png: same bytes as cam1/003.png",
		"14 files looked at",
		"12 imported, 0 already in the project, 1 duplicates, 1 skipped",
	} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("import output lacks %q:\n%s", want, r.stdout)
		}
	}
	// Not a terminal: progress goes to the log, the bar stays away.
	if strings.Contains(r.stderr, "importing") {
		t.Errorf("progress bar drawn on a non-terminal:\n%s", r.stderr)
	}

	r = runConcord(t, "", []string{"import", "--project", "import-cli", "--data", data, dir})
	if r.err != nil || !strings.Contains(r.stdout, "0 imported, 13 already in the project") {
		t.Errorf("re-run: %v\n%s", r.err, r.stdout)
	}
}

func TestImportCommandRefusesEscapingManifest(t *testing.T) {
	_, _ = cliProject(t, "import-escape")
	base := t.TempDir()
	writeTestFile(t, filepath.Join(base, "outside.png"), beltPNG(t, 1))
	writeTestFile(t, filepath.Join(base, "in", "a.png"), beltPNG(t, 2))
	writeTestFile(t, filepath.Join(base, "in", "list.csv"), []byte("path,group\na.png,g\n../outside.png,g\n"))
	r := runConcord(t, "", []string{"import", "--project", "import-escape", "--data", t.TempDir(), filepath.Join(base, "in", "list.csv")})
	if r.err == nil || !strings.Contains(r.err.Error(), "list.csv:3: path \"../outside.png\": leads outside the manifest's folder") {
		t.Errorf("error %v, want one naming list.csv:3", r.err)
	}
}

func TestImportCommandUsage(t *testing.T) {
	for _, args := range [][]string{
		{"import", "somewhere"},
		{"import", "--project", "x"},
		{"import", "--project", "x", "--near-duplicate-distance", "99", "dir"},
	} {
		r := runConcord(t, "", args)
		var ue usageError
		if r.err == nil || !errors.As(r.err, &ue) {
			t.Errorf("%v: error %v, want a usage error", args, r.err)
		}
	}
	r := runConcord(t, "", []string{"import", "--project", "no-such-project", "--data", t.TempDir(), t.TempDir()})
	if r.err == nil || !strings.Contains(r.err.Error(), "not found") {
		t.Errorf("unknown project: %v", r.err)
	}
}
