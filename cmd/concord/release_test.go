package main

import (
	"bufio"
	"bytes"
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/concord-labs/concord/store"
)

func TestReleaseCommand(t *testing.T) {
	ctx := context.Background()
	s, p := cliProject(t, "release-cli")
	dir, data := t.TempDir(), t.TempDir()
	for k := range 30 {
		writeTestFile(t, filepath.Join(dir, fmt.Sprintf("%03d.png", k)), beltPNG(t, k))
	}
	if r := runConcord(t, "", []string{"import", "--project", "release-cli", "--data", data, dir}); r.err != nil {
		t.Fatalf("import: %v\n%s", r.err, r.stdout)
	}
	// Even items are sure PET bottles, odd ones disputed between the two
	// leaves but for item 1 a lead decided.
	labels, _ := s.Labels(ctx, p.ID)
	ids := map[string]int64{}
	for _, l := range labels {
		ids[l.Key] = l.ID
	}
	_, err := s.Pool().Exec(ctx, `
		INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count)
		SELECT id, project_id, CASE WHEN id % 2 = 0 THEN $2::bigint ELSE $3::bigint END,
			CASE WHEN id % 2 = 0 THEN 0.98 ELSE 0.6 END, 'ds', 3
		FROM items WHERE project_id = $1`, p.ID, ids["pet-bottle"], ids["aluminium-can"])
	if err != nil {
		t.Fatal(err)
	}
	var firstOdd int64
	s.Pool().QueryRow(ctx, `SELECT min(id) FROM items WHERE project_id = $1 AND id % 2 = 1`, p.ID).Scan(&firstOdd)
	if _, err := s.Pool().Exec(ctx, `INSERT INTO gold_answers (item_id, project_id, label_id, source) VALUES ($1, $2, $3, 'lead')`,
		firstOdd, p.ID, ids["aluminium-can"]); err != nil {
		t.Fatal(err)
	}

	// A folder that is not empty is refused before anything is recorded.
	full := t.TempDir()
	writeTestFile(t, filepath.Join(full, "old.txt"), []byte("an earlier release"))
	r := runConcord(t, "", []string{"release", "--project", "release-cli", "--name", "r0", "--data", data, "--out", full})
	if r.err == nil || !strings.Contains(r.err.Error(), "not empty") {
		t.Errorf("release into a full folder: %v, want not empty", r.err)
	}
	if _, err := s.ReleaseByName(ctx, p.ID, "r0"); err == nil {
		t.Error("the refused release r0 was recorded")
	}

	out := filepath.Join(t.TempDir(), "r1")
	r = runConcord(t, "", []string{"release", "--project", "release-cli", "--name", "r1", "--data", data,
		"--format", "jsonl,csv,folders", "--split", "70/15/15", "--out", out})
	if r.err != nil {
		t.Fatalf("release: %v\n%s", r.err, r.stdout)
	}
	if !strings.Contains(r.stdout, "release r1 (id ") || !strings.Contains(r.stdout, ": 16 items, split 70/15/15, seed 7, level leaf") ||
		!strings.Contains(r.stdout, "images: 16 hard-linked, 0 copied") {
		t.Errorf("release output:\n%s", r.stdout)
	}
	for _, name := range []string{"manifest.jsonl", "manifest.csv", "release.json", "CARD.md", "SHA256SUMS"} {
		if _, err := os.Stat(filepath.Join(out, name)); err != nil {
			t.Errorf("release lacks %s", name)
		}
	}
	card, _ := os.ReadFile(filepath.Join(out, "CARD.md"))
	for _, want := range []string{"| pet-bottle |", "| aluminium-can |", "seed 7", "consent"} {
		if !bytes.Contains(card, []byte(want)) {
			t.Errorf("CARD.md lacks %q", want)
		}
	}
	csv, _ := os.ReadFile(filepath.Join(out, "manifest.csv"))
	sc := bufio.NewScanner(bytes.NewReader(csv))
	sc.Scan()
	if sc.Text() != "item,file,sha256,split,label,label_path,confidence,votes,group" {
		t.Errorf("CSV header %q", sc.Text())
	}
	files := 0
	for sc.Scan() {
		f := strings.Split(sc.Text(), ",")
		if _, err := os.Stat(filepath.Join(out, f[1])); err != nil {
			t.Errorf("manifest names %s, which the folder lacks", f[1])
		}
		if f[0] == fmt.Sprint(firstOdd) && (f[4] != "aluminium-can" || f[5] != "metal/aluminium-can" || f[6] != "1") {
			t.Errorf("lead-decided item: %s", sc.Text())
		}
		files++
	}
	if files != 16 {
		t.Errorf("%d manifest rows, want 16 (15 sure + 1 lead decision)", files)
	}

	// The same inputs and seed under a new name give the same manifest.
	out2 := filepath.Join(t.TempDir(), "r2")
	r = runConcord(t, "", []string{"release", "--project", "release-cli", "--name", "r2", "--data", data,
		"--format", "jsonl", "--split", "70/15/15", "--out", out2})
	if r.err != nil {
		t.Fatal(r.err)
	}
	a, _ := os.ReadFile(filepath.Join(out, "manifest.jsonl"))
	b, _ := os.ReadFile(filepath.Join(out2, "manifest.jsonl"))
	if !bytes.Equal(a, b) || len(a) == 0 {
		t.Error("manifest.jsonl differs between two releases of the same inputs and seed")
	}
	// The project moves on: the sure PET bottles become aluminium cans and
	// more images arrive. --existing writes r1 again as it was cut.
	if _, err := s.Pool().Exec(ctx, `UPDATE consensus SET label_id = $2 WHERE project_id = $1 AND label_id = $3`,
		p.ID, ids["aluminium-can"], ids["pet-bottle"]); err != nil {
		t.Fatal(err)
	}
	more := t.TempDir()
	for k := 30; k < 36; k++ {
		writeTestFile(t, filepath.Join(more, fmt.Sprintf("%03d.png", k)), beltPNG(t, k))
	}
	if r := runConcord(t, "", []string{"import", "--project", "release-cli", "--data", data, more}); r.err != nil {
		t.Fatalf("import: %v\n%s", r.err, r.stdout)
	}
	out3 := filepath.Join(t.TempDir(), "r1-again")
	r = runConcord(t, "", []string{"release", "--project", "release-cli", "--name", "r1", "--data", data, "--existing", "--out", out3})
	if r.err != nil {
		t.Fatalf("release --existing: %v\n%s", r.err, r.stdout)
	}
	rec, err := s.ReleaseByName(ctx, p.ID, "r1")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(r.stdout, fmt.Sprintf(": 16 items, split 70/15/15, seed 7, level leaf, min confidence 0.95\nmanifest SHA-256 %x matches the record", rec.ManifestSHA256)) ||
		!strings.Contains(r.stdout, "images: 16 hard-linked, 0 copied") {
		t.Errorf("release --existing output:\n%s", r.stdout)
	}
	// Every file, release.json and SHA256SUMS included, is as first issued.
	firstFiles, againFiles := treeFiles(t, out), treeFiles(t, out3)
	if len(firstFiles) != 5+16 || len(againFiles) != len(firstFiles) {
		t.Errorf("%d files written again, %d first issued, want %d", len(againFiles), len(firstFiles), 5+16)
	}
	for name, a := range firstFiles {
		if b, ok := againFiles[name]; len(a) == 0 || !ok || !bytes.Equal(a, b) {
			t.Errorf("%s written again differs from the first issue (%d vs %d bytes)", name, len(a), len(b))
		}
	}
	if !bytes.Equal(againFiles["release.json"], rec.ReleaseJSON) || bytes.Contains(rec.ReleaseJSON, []byte(`"reissued"`)) {
		t.Errorf("release.json written again is not the recorded one:\n%s", againFiles["release.json"])
	}
	if got, _ := os.ReadFile(filepath.Join(out3, "manifest.jsonl")); sha256.Sum256(got) != rec.ManifestSHA256 {
		t.Error("manifest.jsonl written again does not have the recorded SHA-256")
	}
	if entries, _ := os.ReadDir(filepath.Join(out3, "train")); len(entries) == 0 {
		t.Error("--existing wrote no image folders for a release cut with them")
	}
	r = runConcord(t, "", []string{"release", "--project", "release-cli", "--name", "r7", "--data", data, "--existing", "--out", t.TempDir()})
	if r.err == nil || !errors.Is(r.err, store.ErrNotFound) {
		t.Errorf("--existing of an unknown release: %v, want not found", r.err)
	}

	// A release name is used once; a non-empty folder is refused.
	r = runConcord(t, "", []string{"release", "--project", "release-cli", "--name", "r2", "--data", data, "--out", t.TempDir()})
	if r.err == nil || !strings.Contains(r.err.Error(), "conflict") {
		t.Errorf("second r2: %v, want a conflict", r.err)
	}
}

func TestReleaseCommandUsage(t *testing.T) {
	for _, args := range [][]string{
		{"release", "--project", "p", "--name", "n"},
		{"release", "--project", "p", "--name", "n", "--out", "o", "--split", "80/20"},
		{"release", "--project", "p", "--name", "n", "--out", "o", "--level", "deep"},
		{"release", "--project", "p", "--name", "n", "--out", "o", "--format", "xml"},
		{"release", "--project", "p", "--name", "bad name", "--out", "o"},
		{"release", "--project", "p", "--name", "n", "--out", "o", "--existing", "--split", "80/10/10"},
		{"release", "--project", "p", "--name", "n", "--out", "o", "--existing", "--format", "jsonl"},
	} {
		r := runConcord(t, "", args)
		var ue usageError
		if r.err == nil || !errors.As(r.err, &ue) {
			t.Errorf("%v: error %v, want a usage error", args, r.err)
		}
	}
}

// treeFiles reads every regular file under dir, by slash path relative to it.
func treeFiles(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	out := map[string][]byte{}
	err := filepath.WalkDir(dir, func(path string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		rel, err := filepath.Rel(dir, path)
		if err != nil {
			return err
		}
		out[filepath.ToSlash(rel)], err = os.ReadFile(path)
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}
