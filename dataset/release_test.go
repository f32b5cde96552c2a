package dataset_test

import (
	"archive/tar"
	"bytes"
	"compress/gzip"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store"
)

// releaseFixture imports n drawn images (every fifth a near copy of the one
// before) and gives each a consensus row, cycling through the leaves.
type releaseFixture struct {
	s      *store.Store
	p      store.Project
	im     *dataset.Importer
	labels map[string]int64
	dir    string
	next   int
}

func newReleaseFixture(t *testing.T) *releaseFixture {
	s, p, im := newProject(t)
	labels, err := s.Labels(context.Background(), p.ID)
	if err != nil {
		t.Fatal(err)
	}
	f := &releaseFixture{s: s, p: p, im: im, labels: map[string]int64{}, dir: t.TempDir()}
	for _, l := range labels {
		f.labels[l.Key] = l.ID
	}
	return f
}

// add imports n more images and writes consensus for the new items.
func (f *releaseFixture) add(t *testing.T, n int) {
	t.Helper()
	ctx := context.Background()
	batch := filepath.Join(f.dir, fmt.Sprint(f.next))
	for i := range n {
		k := f.next + i
		img := belt(96, 72, k)
		data := encodePNG(t, img)
		if k%5 == 4 {
			data = encodeJPEG(t, belt(96, 72, k-1), 70) // near copy of the previous scene
		}
		writeFile(t, filepath.Join(batch, fmt.Sprintf("%05d.png", k)), data)
	}
	f.next += n
	if _, err := f.im.ImportPath(ctx, f.p.ID, batch); err != nil {
		t.Fatal(err)
	}
	leaves := []string{"pet-bottle", "plastic-film", "aluminium-can", "glass"}
	_, err := f.s.Pool().Exec(ctx, `
		INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count)
		SELECT i.id, i.project_id, ($2::bigint[])[1 + i.id % 4], 0.99, 'ds', 3
		FROM items i WHERE i.project_id = $1
		ON CONFLICT (item_id) DO NOTHING`,
		f.p.ID, []int64{f.labels[leaves[0]], f.labels[leaves[1]], f.labels[leaves[2]], f.labels[leaves[3]]})
	if err != nil {
		t.Fatal(err)
	}
}

func params(name string) dataset.ReleaseParams {
	return dataset.ReleaseParams{Name: name, Seed: 42, Split: dataset.Fractions{60, 20, 20}, MinConfidence: 0.95,
		Level: dataset.LevelLeaf, Formats: []string{"csv", "folders", "jsonl"}}
}

func TestReleaseGrowsStably(t *testing.T) {
	ctx := context.Background()
	f := newReleaseFixture(t)
	f.add(t, 40)
	r := &dataset.Releaser{Store: f.s}
	rel1, rec1, err := r.Create(ctx, f.p.ID, params("v1"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(rel1.Rows) != 40 || rec1.ItemCount != 40 {
		t.Fatalf("v1 has %d rows (%d recorded), want 40", len(rel1.Rows), rec1.ItemCount)
	}
	checkGroups(t, f, rel1)

	// Same inputs and seed: byte-identical files, even before recording.
	in, err := r.Input(ctx, f.p.ID, params("v1"))
	if err != nil {
		t.Fatal(err)
	}
	again, err := dataset.BuildRelease(in)
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{dataset.ManifestJSONL, dataset.ManifestCSV} {
		if !bytes.Equal(again.Files[name], rel1.Files[name]) {
			t.Errorf("%s differs between two builds from the same inputs", name)
		}
	}

	// The dataset grows; earlier items keep their splits.
	f.add(t, 30)
	rel2, _, err := r.Create(ctx, f.p.ID, params("v2"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(rel2.Rows) != 70 {
		t.Fatalf("v2 has %d rows, want 70", len(rel2.Rows))
	}
	was := map[int64]dataset.Split{}
	for _, row := range rel1.Rows {
		was[row.Item] = row.Split
	}
	for _, row := range rel2.Rows {
		if s, ok := was[row.Item]; ok && s != row.Split {
			t.Errorf("item %d moved from %v to %v", row.Item, s, row.Split)
		}
	}
	checkGroups(t, f, rel2)

	// Recorded, listed, immutable, names unique.
	list, err := f.s.Releases(ctx, f.p.ID)
	if err != nil || len(list) != 2 || list[0].Name != "v2" || list[1].ManifestSHA256 != rel1.ManifestSHA256 {
		t.Fatalf("Releases = %+v, %v", list, err)
	}
	if _, err := f.s.Pool().Exec(ctx, `UPDATE release_items SET split = 'train' WHERE release_id = $1`, rec1.ID); err == nil {
		t.Error("a recorded release item was changed")
	}
	if _, _, err := r.Create(ctx, f.p.ID, params("v1"), nil); err == nil || !strings.Contains(err.Error(), "conflict") {
		t.Errorf("a second v1: %v, want a conflict", err)
	}
	items, err := f.s.ReleaseItems(ctx, rec1.ID)
	if err != nil || len(items) != 40 || items[0].ItemID != rel1.Rows[0].Item || items[0].Split != rel1.Rows[0].Split.String() {
		t.Errorf("ReleaseItems = %d items, %v", len(items), err)
	}

	// Written as a folder and as a tar.gz, the checksums hold.
	out := filepath.Join(t.TempDir(), "v2")
	st, err := rel2.WriteDir(ctx, f.im.Blobs, out)
	if err != nil {
		t.Fatal(err)
	}
	if st.Linked != 70 {
		t.Errorf("linked %d images, copied %d; want 70 linked", st.Linked, st.Copied)
	}
	checkSums(t, out, 70+4)
	var tgz bytes.Buffer
	if err := rel2.WriteTarGz(ctx, &tgz, f.im.Blobs); err != nil {
		t.Fatal(err)
	}
	checkTar(t, tgz.Bytes(), out)
}

// checkGroups: no near-duplicate cluster crosses splits.
func checkGroups(t *testing.T, f *releaseFixture, rel *dataset.Release) {
	t.Helper()
	items, err := f.s.Items(context.Background(), f.p.ID, store.ItemPage{Limit: 1000})
	if err != nil {
		t.Fatal(err)
	}
	cluster := map[int64]int64{}
	multi := map[int64]int{}
	for _, it := range items {
		cluster[it.ID] = *it.ClusterID
		multi[*it.ClusterID]++
	}
	splitOf := map[int64]dataset.Split{}
	clustered := 0
	for _, row := range rel.Rows {
		c := cluster[row.Item]
		if multi[c] > 1 {
			clustered++
		}
		if s, ok := splitOf[c]; ok && s != row.Split {
			t.Errorf("cluster %d is in %v and %v", c, s, row.Split)
		}
		splitOf[c] = row.Split
	}
	if clustered == 0 {
		t.Error("the fixture has no near-duplicate clusters; the check proves nothing")
	}
}

// checkSums: SHA256SUMS has want lines and each matches its file.
func checkSums(t *testing.T, dir string, want int) {
	t.Helper()
	sums, err := os.ReadFile(filepath.Join(dir, dataset.SumsFile))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(sums)), "\n")
	if len(lines) != want {
		t.Errorf("%d checksum lines, want %d", len(lines), want)
	}
	for _, line := range lines {
		sum, name, _ := strings.Cut(line, "  ")
		data, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		got := sha256.Sum256(data)
		if hex.EncodeToString(got[:]) != sum {
			t.Errorf("%s: checksum mismatch", name)
		}
	}
}

func checkTar(t *testing.T, tgz []byte, dir string) {
	t.Helper()
	gz, err := gzip.NewReader(bytes.NewReader(tgz))
	if err != nil {
		t.Fatal(err)
	}
	tr := tar.NewReader(gz)
	n := 0
	for {
		h, err := tr.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		data, _ := io.ReadAll(tr)
		want, err := os.ReadFile(filepath.Join(dir, strings.TrimPrefix(h.Name, "v2/")))
		if err != nil || !bytes.Equal(data, want) {
			t.Errorf("%s in the archive differs from the folder (%v)", h.Name, err)
		}
		n++
	}
	if n != 75 {
		t.Errorf("%d archive entries, want 75 (70 images, 2 manifests, release.json, card, sums)", n)
	}
}

// TestReleaseLevels: a disputed leaf is left out at leaf level and kept
// under its sure ancestor at depth 0; a lead decision is always in.
func TestReleaseLevels(t *testing.T) {
	nodes := []dataset.TaxNode{
		{ID: 10, Key: "plastic", Name: "Plastic", Depth: 0},
		{ID: 11, ParentID: 10, Key: "pet-bottle", Name: "PET bottle", Depth: 1, IsLeaf: true},
		{ID: 12, ParentID: 10, Key: "plastic-film", Name: "Plastic film", Depth: 1, IsLeaf: true},
		{ID: 20, Key: "glass", Name: "Glass", Depth: 0, IsLeaf: true},
	}
	items := []dataset.Candidate{
		{ID: 1, MediaType: "image/png", Vote: dataset.Vote{PosteriorLabels: []int64{11, 12, 20}, Posterior: []float64{0.6, 0.38, 0.02}}},
		{ID: 2, MediaType: "image/png", Vote: dataset.Vote{LabelID: 11, Confidence: 0.7, RollupLabelID: 10, RollupConfidence: 0.97}},
		{ID: 3, MediaType: "image/png", Vote: dataset.Vote{LabelID: 20, Confidence: 0.99}},
		{ID: 4, MediaType: "image/png", Vote: dataset.Vote{LabelID: 20, Confidence: 0.5, LeadLabelID: 12}},
		{ID: 5, MediaType: "image/png", Vote: dataset.Vote{LabelID: 20, Confidence: 0.5}},
	}
	cases := []struct {
		level int
		want  string
	}{
		{dataset.LevelLeaf, "3:glass:0:0.99 4:plastic-film:1:1"},
		{0, "1:plastic:0:0.98 2:plastic:0:0.97 3:glass:0:0.99 4:plastic:0:1"},
		{1, "3:glass:0:0.99 4:plastic-film:1:1"},
	}
	for _, c := range cases {
		p := params(fmt.Sprint("level-", c.level+1))
		p.Level = c.level
		rel, err := dataset.BuildRelease(dataset.ReleaseInput{Params: p, Items: items, Taxonomy: nodes})
		if err != nil {
			t.Fatal(err)
		}
		var got []string
		for _, r := range rel.Rows {
			depth := strings.Count(r.LabelPath, "/")
			got = append(got, fmt.Sprintf("%d:%s:%d:%g", r.Item, r.Label, depth, r.Confidence))
		}
		if g := strings.Join(got, " "); g != c.want {
			t.Errorf("level %d: %s, want %s", c.level, g, c.want)
		}
	}
}

// A later release with another seed and split ratio deals out only the
// items never released; every item of the earlier release keeps its
// split, so no test item becomes a training item.
func TestReleaseReseededKeepsEarlierSplits(t *testing.T) {
	ctx := context.Background()
	f := newReleaseFixture(t)
	f.add(t, 40)
	r := &dataset.Releaser{Store: f.s}
	rel1, _, err := r.Create(ctx, f.p.ID, params("v1"), nil)
	if err != nil {
		t.Fatal(err)
	}
	was := map[int64]dataset.Split{}
	tests := 0
	for _, row := range rel1.Rows {
		was[row.Item] = row.Split
		if row.Split == dataset.Test {
			tests++
		}
	}
	if tests == 0 {
		t.Fatal("v1 has no test items; the check below would prove nothing")
	}
	f.add(t, 30)
	p := params("v2-reseeded")
	p.Seed, p.Split = 43, dataset.Fractions{95, 3, 2}
	rel2, _, err := r.Create(ctx, f.p.ID, p, nil)
	if err != nil {
		t.Fatal(err)
	}
	newTrain := 0
	for _, row := range rel2.Rows {
		if s, ok := was[row.Item]; ok && s != row.Split {
			t.Errorf("item %d moved from %v in v1 to %v in the reseeded v2", row.Item, s, row.Split)
		} else if !ok && row.Split == dataset.Train {
			newTrain++
		}
	}
	// The 30 new items follow the new ratio: at 95% train, hardly any miss it
	// (each new group lands in train with probability 0.95).
	if newTrain < 20 {
		t.Errorf("%d of 30 new items in train under 95/3/2; the new ratio was not used for them", newTrain)
	}
	checkGroups(t, f, rel2)
}

// A release that fails half-way through writing leaves neither its folder
// nor a partial one; a folder that is not empty is refused.
func TestWriteDirAllOrNothing(t *testing.T) {
	ctx := context.Background()
	f := newReleaseFixture(t)
	f.add(t, 12)
	rel, _, err := (&dataset.Releaser{Store: f.s}).Create(ctx, f.p.ID, params("v1"), nil)
	if err != nil {
		t.Fatal(err)
	}
	parent := t.TempDir()
	out := filepath.Join(parent, "v1")
	cancelled, cancel := context.WithCancel(ctx)
	cancel() // stops the image loop after the release's own files are written
	if _, err := rel.WriteDir(cancelled, f.im.Blobs, out); !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled write: %v, want context.Canceled", err)
	}
	if left, _ := os.ReadDir(parent); len(left) != 0 {
		t.Errorf("a failed write left %v in the parent folder", left)
	}
	if _, err := rel.WriteDir(ctx, f.im.Blobs, out); err != nil {
		t.Fatal(err)
	}
	checkSums(t, out, 12+4)
	if _, err := rel.WriteDir(ctx, f.im.Blobs, out); err == nil || !strings.Contains(err.Error(), "not empty") {
		t.Errorf("second write into the same folder: %v, want not empty", err)
	}
}
