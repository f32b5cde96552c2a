package dataset_test

import (
	"context"
	"image"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store"
)

func writeFile(t testing.TB, path string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestImportFolder(t *testing.T) {
	ctx := context.Background()
	s, p, im := newProject(t)
	dir := t.TempDir()
	scene1 := belt(320, 240, 1)
	a := encodePNG(t, scene1)
	writeFile(t, filepath.Join(dir, "a.png"), a)
	writeFile(t, filepath.Join(dir, "b.png"), encodePNG(t, belt(320, 240, 2)))
	writeFile(t, filepath.Join(dir, "day2", "a-again.png"), a) // same bytes
	writeFile(t, filepath.Join(dir, "day2", "a-small.jpg"), encodeJPEG(t, resized(scene1, 160, 120), 60))
	writeFile(t, filepath.Join(dir, "day2", "c.gif"), encodeGIF(t, belt(100, 80, 3)))
	corrupt := encodePNG(t, belt(320, 240, 4))
	writeFile(t, filepath.Join(dir, "day2", "broken.png"), corrupt[:len(corrupt)/2])
	writeFile(t, filepath.Join(dir, "notes.txt"), []byte("camera 2, shift B"))

	rep, err := im.ImportPath(ctx, p.ID, dir)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Imported != 4 || rep.Seen != 6 || rep.Ignored != 1 || rep.Existing != 0 {
		t.Errorf("report %+v, want 4 imported of 6 seen, 1 ignored", rep)
	}
	if len(rep.Duplicates) != 1 || rep.Duplicates[0] != (dataset.Duplicate{Name: "day2/a-again.png", Of: "a.png"}) {
		t.Errorf("duplicates %+v, want day2/a-again.png of a.png", rep.Duplicates)
	}
	if len(rep.Skipped) != 1 || rep.Skipped[0].Name != "day2/broken.png" || !strings.Contains(rep.Skipped[0].Reason, "corrupt png") {
		t.Errorf("skipped %+v, want day2/broken.png as corrupt", rep.Skipped)
	}
	if rep.Clusters != 1 || rep.ClusteredItems != 2 {
		t.Errorf("%d clusters of %d items, want a.png and its small JPEG copy", rep.Clusters, rep.ClusteredItems)
	}
	items, err := s.Items(ctx, p.ID, store.ItemPage{Limit: 10})
	if err != nil {
		t.Fatal(err)
	}
	byName := map[string]store.Item{}
	for _, it := range items {
		byName[it.OriginalName] = it
	}
	orig, small := byName["a.png"], byName["day2/a-small.jpg"]
	if orig.ClusterID == nil || small.ClusterID == nil || *small.ClusterID != orig.ID || *orig.ClusterID != orig.ID {
		t.Errorf("a.png (id %d) cluster %v, its copy's %v; want both %d", orig.ID, orig.ClusterID, small.ClusterID, orig.ID)
	}
	if c := byName["day2/c.gif"]; c.MediaType != "image/gif" || c.Width != 100 || c.Height != 80 {
		t.Errorf("day2/c.gif stored as %s %dx%d", c.MediaType, c.Width, c.Height)
	}
	if *byName["b.png"].ClusterID == orig.ID {
		t.Error("b.png, a different scene, joined a.png's cluster")
	}
	// The thumbnail is a JPEG within ThumbMaxSide, with the picture's shape.
	r, err := im.Blobs.Open(ctx, dataset.ThumbKey(orig))
	if err != nil {
		t.Fatal(err)
	}
	cfg, format, err := image.DecodeConfig(r)
	r.Close()
	if err != nil || format != "jpeg" || cfg.Width != 256 || cfg.Height != 192 {
		t.Errorf("thumbnail %s %dx%d (%v), want jpeg 256x192", format, cfg.Width, cfg.Height, err)
	}

	// A re-run skips everything already in; a new copy of b joins b's cluster.
	writeFile(t, filepath.Join(dir, "day3", "b-copy.jpg"), encodeJPEG(t, belt(320, 240, 2), 50))
	rep, err = im.ImportPath(ctx, p.ID, dir)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Imported != 1 || rep.Existing != 5 || len(rep.Duplicates) != 0 {
		t.Errorf("re-run report %+v, want 1 imported and 5 existing", rep)
	}
	if rep.Clusters != 2 || rep.ClusteredItems != 4 {
		t.Errorf("after the re-run %d clusters of %d items, want 2 of 4", rep.Clusters, rep.ClusteredItems)
	}
}

func TestImportLimits(t *testing.T) {
	ctx := context.Background()
	_, p, im := newProject(t)
	dir := t.TempDir()
	big := encodePNG(t, belt(400, 300, 5))
	writeFile(t, filepath.Join(dir, "big.png"), big)
	writeFile(t, filepath.Join(dir, "wide.png"), encodePNG(t, image.NewGray(image.Rect(0, 0, 1000, 2))))
	im.MaxBytes = int64(len(big) - 1)
	im.MaxPixels = 1999
	rep, err := im.ImportPath(ctx, p.ID, dir)
	if err != nil {
		t.Fatal(err)
	}
	reasons := map[string]string{}
	for _, s := range rep.Skipped {
		reasons[s.Name] = s.Reason
	}
	if !strings.Contains(reasons["big.png"], "larger than the limit") || !strings.Contains(reasons["wide.png"], "1000x2 pixels is over the limit of 1999") {
		t.Errorf("skipped %+v", rep.Skipped)
	}
	if rep.Imported != 0 {
		t.Errorf("imported %d, want 0", rep.Imported)
	}
}

func TestImportManifest(t *testing.T) {
	ctx := context.Background()
	s, p, im := newProject(t)
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "imgs", "a.png"), encodePNG(t, belt(64, 64, 1)))
	writeFile(t, filepath.Join(dir, "imgs", "b.png"), encodePNG(t, belt(64, 64, 2)))
	writeFile(t, filepath.Join(dir, "list.csv"), []byte("path,group,prior_label\nimgs/a.png,bin-7,pet-bottle\n./imgs/b.png,bin-7,\nimgs/missing.png,,\n"))
	rep, err := im.ImportPath(ctx, p.ID, filepath.Join(dir, "list.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if rep.Imported != 2 || len(rep.Skipped) != 1 || !strings.Contains(rep.Skipped[0].Reason, "list.csv:4: path: file not found") {
		t.Errorf("report %+v, want 2 imported and imgs/missing.png skipped naming line 4", rep)
	}
	items, _ := s.Items(ctx, p.ID, store.ItemPage{})
	if len(items) != 2 || items[0].GroupKey != "bin-7" || items[0].PriorLabel != "pet-bottle" || items[1].GroupKey != "bin-7" {
		t.Errorf("items %+v", items)
	}
}

func TestImportManifestRefusesEscapes(t *testing.T) {
	ctx := context.Background()
	s, p, im := newProject(t)
	base := t.TempDir()
	outside := filepath.Join(base, "secret.png")
	writeFile(t, outside, encodePNG(t, belt(64, 64, 9)))
	dir := filepath.Join(base, "import")
	writeFile(t, filepath.Join(dir, "ok.png"), encodePNG(t, belt(64, 64, 1)))
	if err := os.Symlink(outside, filepath.Join(dir, "link.png")); err != nil {
		t.Fatal(err)
	}
	cases := map[string]string{
		"dot-dot":  "path\nok.png\n../secret.png\n",
		"absolute": "path\nok.png\n" + outside + "\n",
		"symlink":  "path\nok.png\nlink.png\n",
	}
	for name, csv := range cases {
		t.Run(name, func(t *testing.T) {
			m := filepath.Join(dir, name+".csv")
			writeFile(t, m, []byte(csv))
			_, err := im.ImportPath(ctx, p.ID, m)
			if err == nil || !strings.Contains(err.Error(), name+".csv:3: path") {
				t.Fatalf("error %v, want one naming %s.csv:3", err, name)
			}
		})
	}
	if shas, _ := s.ItemSHAs(ctx, p.ID); len(shas) != 0 {
		t.Errorf("a refused manifest imported %d items", len(shas))
	}
	// A folder import skips the link instead of following it out.
	rep, err := im.ImportPath(ctx, p.ID, dir)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Imported != 1 || len(rep.Skipped) != 1 || rep.Skipped[0].Name != "link.png" {
		t.Errorf("folder report %+v, want ok.png imported and link.png skipped", rep)
	}
}

// WebP: both encodings decode, are stored as image/webp with their size,
// and cluster as near-duplicates; a truncated file is reported and skipped.
// The fixtures come from golang.org/x/image (testdata/webp/README.md).
func TestImportWebP(t *testing.T) {
	ctx := context.Background()
	s, p, im := newProject(t)
	dir := t.TempDir()
	var lossy []byte
	for _, name := range []string{"blue-purple-pink.lossless.webp", "blue-purple-pink.lossy.webp"} {
		data, err := os.ReadFile(filepath.Join("testdata", "webp", name))
		if err != nil {
			t.Fatal(err)
		}
		writeFile(t, filepath.Join(dir, name), data)
		lossy = data
	}
	writeFile(t, filepath.Join(dir, "cut.webp"), lossy[:len(lossy)/2])
	rep, err := im.ImportPath(ctx, p.ID, dir)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Imported != 2 || len(rep.Skipped) != 1 || rep.Skipped[0].Name != "cut.webp" || !strings.Contains(rep.Skipped[0].Reason, "webp") {
		t.Errorf("report %+v, want 2 imported and cut.webp skipped as a bad webp", rep)
	}
	if rep.Clusters != 1 || rep.ClusteredItems != 2 {
		t.Errorf("%d clusters of %d items, want the two encodings of one picture together", rep.Clusters, rep.ClusteredItems)
	}
	items, err := s.Items(ctx, p.ID, store.ItemPage{Limit: 10})
	if err != nil {
		t.Fatal(err)
	}
	if len(items) != 2 {
		t.Fatalf("%d items stored, want 2", len(items))
	}
	for _, it := range items {
		if it.MediaType != "image/webp" || it.Width != 150 || it.Height != 100 {
			t.Errorf("%s stored as %s %dx%d, want image/webp 150x100", it.OriginalName, it.MediaType, it.Width, it.Height)
		}
	}
}
