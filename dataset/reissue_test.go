package dataset_test

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store"
)

// TestLoadRecordedRelease: a release is rebuilt from its record after the
// project moved on (labels flipped by new consensus, new items, a reshaped
// taxonomy), with every file byte-identical, release.json and SHA256SUMS
// included; a release recorded before the snapshot columns falls back to
// its card; an altered record is caught by the checksum.
func TestLoadRecordedRelease(t *testing.T) {
	ctx := context.Background()
	f := newReleaseFixture(t)
	f.add(t, 30)
	r := &dataset.Releaser{Store: f.s}
	first, rec, err := r.Create(ctx, f.p.ID, params("v1"), nil)
	if err != nil {
		t.Fatal(err)
	}

	// Unchanged project: the reissue equals the first issue file for file.
	again, _, err := r.Load(ctx, f.p.ID, "v1")
	if err != nil {
		t.Fatal(err)
	}
	sameFiles(t, first, again)

	// The project moves on: every third item's consensus flips to glass,
	// ten items arrive, and PET bottles move under a new "packaging" node,
	// which changes their label path.
	if _, err := f.s.Pool().Exec(ctx, `UPDATE consensus SET label_id = $2 WHERE project_id = $1 AND item_id % 3 = 0`,
		f.p.ID, f.labels["glass"]); err != nil {
		t.Fatal(err)
	}
	f.add(t, 10)
	err = f.s.ReplaceTaxonomy(ctx, f.p.ID, []store.LabelInput{
		{Key: "plastic", Parent: -1},
		{Key: "packaging", Parent: 0},
		{Key: "pet-bottle", Name: "PET bottle", Parent: 1},
		{Key: "plastic-film", Name: "Plastic film", Parent: 0},
		{Key: "metal", Parent: -1},
		{Key: "aluminium-can", Name: "Aluminium can", Parent: 4},
		{Key: "glass", Parent: -1},
	})
	if err != nil {
		t.Fatal(err)
	}
	// A rebuild from today's data (the old download path) no longer matches.
	in, err := r.Input(ctx, f.p.ID, params("v1"))
	if err != nil {
		t.Fatal(err)
	}
	today, err := dataset.BuildRelease(in)
	if err != nil {
		t.Fatal(err)
	}
	if today.ManifestSHA256 == rec.ManifestSHA256 {
		t.Fatal("the project's changes left the manifest as it was; the test proves nothing")
	}

	later, loaded, err := r.Load(ctx, f.p.ID, "v1")
	if err != nil {
		t.Fatal(err)
	}
	sameFiles(t, first, later)
	if got := sha256.Sum256(later.Files[dataset.ManifestJSONL]); got != rec.ManifestSHA256 || loaded.ID != rec.ID {
		t.Errorf("reissued manifest SHA-256 %x, recorded %x", got, rec.ManifestSHA256)
	}
	if diff := cmp.Diff(first.Counts, later.Counts); diff != "" || !cmp.Equal(first.Labels, later.Labels) {
		t.Errorf("counts (-first +later):\n%s\nlabels %v vs %v", diff, first.Labels, later.Labels)
	}
	var doc struct {
		Items    int    `json:"items"`
		Project  string `json:"project"`
		Reissued string `json:"reissued"`
		Taxonomy []struct {
			Key    string `json:"key"`
			Parent string `json:"parent"`
		} `json:"taxonomy"`
	}
	if err := json.Unmarshal(later.Files[dataset.ReleaseJSON], &doc); err != nil {
		t.Fatal(err)
	}
	// The snapshot is the taxonomy as it was: pet-bottle under plastic.
	// release.json is the one first issued, so it says nothing of a reissue.
	if doc.Items != 30 || doc.Project != "Sorting line" || doc.Reissued != "" || len(doc.Taxonomy) != 6 ||
		doc.Taxonomy[1].Key != "pet-bottle" || doc.Taxonomy[1].Parent != "plastic" {
		t.Errorf("release.json = %+v", doc)
	}
	if p := later.Rows[0].LabelPath; p != first.Rows[0].LabelPath {
		t.Errorf("row 0 label path %q, first issued %q", p, first.Rows[0].LabelPath)
	}
	// Folders and SHA256SUMS hold as written to disk.
	out := filepath.Join(t.TempDir(), "v1")
	if _, err := later.WriteDir(ctx, f.im.Blobs, out); err != nil {
		t.Fatal(err)
	}
	checkSums(t, out, 30+4)

	// An altered row (the immutability trigger switched off, as only a
	// superuser could) is caught, and so is a removed one.
	tamper := func(sql string, args ...any) {
		t.Helper()
		tx, err := f.s.Pool().Begin(ctx)
		if err != nil {
			t.Fatal(err)
		}
		defer tx.Rollback(ctx)
		if _, err := tx.Exec(ctx, `SET LOCAL session_replication_role = replica`); err != nil {
			t.Fatal(err)
		}
		if _, err := tx.Exec(ctx, sql, args...); err != nil {
			t.Fatal(err)
		}
		if err := tx.Commit(ctx); err != nil {
			t.Fatal(err)
		}
	}
	other := "train"
	if first.Rows[3].Split == dataset.Train {
		other = "test"
	}

	// A release recorded before migration 0005 has no snapshot: its
	// taxonomy comes from the card and release.json is rebuilt, saying so.
	tamper(`UPDATE releases SET release_json = NULL, taxonomy = NULL WHERE id = $1`, rec.ID)
	old, oldRec, err := r.Load(ctx, f.p.ID, "v1")
	if err != nil {
		t.Fatal(err)
	}
	if oldRec.ReleaseJSON != nil || oldRec.Taxonomy != nil {
		t.Errorf("NULL snapshot read back as %q, %q", oldRec.ReleaseJSON, oldRec.Taxonomy)
	}
	for _, name := range []string{dataset.ManifestJSONL, dataset.ManifestCSV, dataset.CardFile} {
		if !bytes.Equal(first.Files[name], old.Files[name]) {
			t.Errorf("without a snapshot, %s differs from the first issue", name)
		}
	}
	doc.Reissued = ""
	if err := json.Unmarshal(old.Files[dataset.ReleaseJSON], &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Reissued == "" || len(doc.Taxonomy) != 6 || doc.Taxonomy[1].Key != "pet-bottle" || doc.Taxonomy[1].Parent != "plastic" {
		t.Errorf("release.json without a snapshot = %+v", doc)
	}

	tamper(`UPDATE release_items SET split = '`+other+`' WHERE release_id = $1 AND item_id = $2`, rec.ID, first.Rows[3].Item)
	var mm *dataset.RecordMismatchError
	if _, _, err := r.Load(ctx, f.p.ID, "v1"); !errors.As(err, &mm) {
		t.Errorf("split altered: Load error %v, want a RecordMismatchError", err)
	}
	tamper(`DELETE FROM release_items WHERE release_id = $1 AND item_id = $2`, rec.ID, first.Rows[3].Item)
	if _, _, err := r.Load(ctx, f.p.ID, "v1"); !errors.As(err, &mm) {
		t.Errorf("row removed: Load error %v, want a RecordMismatchError", err)
	}
	if _, _, err := r.Load(ctx, f.p.ID, "v9"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("unknown release: %v, want ErrNotFound", err)
	}
}

// sameFiles: every file of b is that of a, byte for byte.
func sameFiles(t *testing.T, a, b *dataset.Release) {
	t.Helper()
	if len(a.Files) != len(b.Files) {
		t.Errorf("%d files, first issue %d", len(b.Files), len(a.Files))
	}
	for _, name := range []string{dataset.ManifestJSONL, dataset.ManifestCSV, dataset.ReleaseJSON, dataset.CardFile, dataset.SumsFile} {
		if len(a.Files[name]) == 0 || !bytes.Equal(a.Files[name], b.Files[name]) {
			t.Errorf("%s differs from the first issue (%d vs %d bytes)", name, len(a.Files[name]), len(b.Files[name]))
		}
	}
	if a.ManifestSHA256 != b.ManifestSHA256 || len(a.Rows) != len(b.Rows) {
		t.Errorf("manifest %x with %d rows, first issue %x with %d", b.ManifestSHA256, len(b.Rows), a.ManifestSHA256, len(a.Rows))
	}
}

// BenchmarkReissue1M rebuilds a recorded release of a million items from
// its rows in memory (the database read is not included): rows, both
// manifests and the checksum check, release.json and the sums.
func BenchmarkReissue1M(b *testing.B) {
	in := benchInput(1_000_000)
	rel, err := dataset.BuildRelease(in)
	if err != nil {
		b.Fatal(err)
	}
	p := in.Params
	rec := store.Release{Name: p.Name, Seed: p.Seed, SplitTrain: p.Split[0], SplitVal: p.Split[1], SplitTest: p.Split[2],
		MinConfidence: p.MinConfidence, Formats: strings.Join(p.Formats, ","), ItemCount: len(rel.Rows),
		ManifestSHA256: rel.ManifestSHA256, Card: string(rel.Files[dataset.CardFile])}
	items := make([]store.ReleasedItem, len(rel.Rows))
	for i, r := range rel.Rows {
		items[i] = store.ReleasedItem{ReleaseItem: store.ReleaseItem{ItemID: r.Item, Split: r.Split.String(), LabelKey: r.Label,
			Confidence: r.Confidence, Votes: r.Votes, GroupKey: strconv.FormatInt(r.Group, 10)}, MediaType: "image/jpeg"}
		hex.Decode(items[i].SHA256[:], []byte(r.SHA256))
	}
	b.ResetTimer()
	for b.Loop() {
		again, err := dataset.Reissue(rec, items, nil)
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(len(again.Rows)), "rows")
	}
}
