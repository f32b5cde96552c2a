package store_test

import (
	"context"
	"errors"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/concord-labs/concord/store"
)

func TestReleasesRecordedOnceAndPinSplits(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	added, err := f.s.InsertItems(ctx, f.project.ID, []store.NewItem{newItem("r1.png", 1), newItem("r2.png", 2)})
	if err != nil {
		t.Fatal(err)
	}
	a, b := added[newItem("r1.png", 0).SHA256], added[newItem("r2.png", 0).SHA256]
	if _, err := f.s.Pool().Exec(ctx, `INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count)
		VALUES ($1, $2, $3, 0.97, 'ds', 4)`, a, f.project.ID, f.labels["glass"].ID); err != nil {
		t.Fatal(err)
	}
	if _, err := f.s.Pool().Exec(ctx, `INSERT INTO gold_answers (item_id, project_id, label_id, source)
		VALUES ($1, $2, $3, 'lead')`, b, f.project.ID, f.labels["pet-bottle"].ID); err != nil {
		t.Fatal(err)
	}
	cands, err := f.s.ReleaseCandidates(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	if len(cands) != 2 || cands[0].LabelID != f.labels["glass"].ID || cands[0].Confidence != 0.97 || cands[0].Votes != 4 ||
		cands[1].LeadLabelID != f.labels["pet-bottle"].ID || cands[1].LabelID != 0 {
		t.Fatalf("candidates %+v", cands)
	}
	rel := store.Release{ProjectID: f.project.ID, Name: "v1", Seed: 9, SplitTrain: 80, SplitVal: 10, SplitTest: 10,
		MinConfidence: 0.95, Formats: "jsonl", ManifestSHA256: [32]byte{1}}
	items := []store.ReleaseItem{{ItemID: a, Split: "test", LabelKey: "glass", Confidence: 0.97, Votes: 4, GroupKey: "1"},
		{ItemID: b, Split: "train", LabelKey: "pet-bottle", Confidence: 1, Votes: 0, GroupKey: "2"}}
	got, err := f.s.CreateRelease(ctx, rel, items)
	if err != nil {
		t.Fatal(err)
	}
	if got.ID == 0 || got.ItemCount != 2 || got.Level != nil || got.ManifestSHA256 != [32]byte{1} {
		t.Errorf("recorded %+v", got)
	}
	if _, err := f.s.CreateRelease(ctx, rel, items); !errors.Is(err, store.ErrConflict) {
		t.Errorf("same name again: %v, want ErrConflict", err)
	}
	// ReleasedItems joins each row to its item's hash and media type.
	released, err := f.s.ReleasedItems(ctx, got.ID)
	want := []store.ReleasedItem{{ReleaseItem: items[0], SHA256: newItem("r1.png", 0).SHA256, MediaType: "image/png"},
		{ReleaseItem: items[1], SHA256: newItem("r2.png", 0).SHA256, MediaType: "image/png"}}
	if diff := cmp.Diff(want, released); err != nil || diff != "" {
		t.Errorf("ReleasedItems (-want +got):\n%s%v", diff, err)
	}
	if _, err := f.s.ReleasedItems(ctx, got.ID+1_000_000); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("ReleasedItems of no release: %v, want ErrNotFound", err)
	}
	pins, err := f.s.PriorSplits(ctx, f.project.ID)
	if err != nil || pins[a] != "test" || pins[b] != "train" {
		t.Errorf("PriorSplits = %v, %v", pins, err)
	}
	// A later release with another seed that put a in train and b in
	// validation: a stays pinned to test (test is never given up), b moves
	// up to validation.
	rel2 := rel
	rel2.Name, rel2.Seed, rel2.SplitTrain, rel2.SplitVal, rel2.SplitTest = "v1-reseeded", 10, 90, 5, 5
	items2 := []store.ReleaseItem{{ItemID: a, Split: "train", LabelKey: "glass", Confidence: 0.97, Votes: 4, GroupKey: "1"},
		{ItemID: b, Split: "validation", LabelKey: "pet-bottle", Confidence: 1, Votes: 0, GroupKey: "2"}}
	if _, err := f.s.CreateRelease(ctx, rel2, items2); err != nil {
		t.Fatal(err)
	}
	if pins, err := f.s.PriorSplits(ctx, f.project.ID); err != nil || len(pins) != 2 || pins[a] != "test" || pins[b] != "validation" {
		t.Errorf("PriorSplits over two seeds = %v, %v; want a test, b validation", pins, err)
	}
	// Newest first.
	list, err := f.s.Releases(ctx, f.project.ID)
	if err != nil || len(list) != 2 || list[0].Name != "v1-reseeded" || list[1].Name != "v1" {
		t.Errorf("Releases = %+v, %v", list, err)
	}
	if _, err := f.s.ReleaseByName(ctx, f.project.ID, "nope"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("missing release: %v", err)
	}
	if _, err := f.s.Pool().Exec(ctx, `UPDATE releases SET name = 'v9' WHERE id = $1`, got.ID); err == nil {
		t.Error("a recorded release was renamed")
	}
	if votes, _, err := f.s.VoteTotals(ctx, f.project.ID); err != nil || votes != 0 {
		t.Errorf("VoteTotals = %d, %v", votes, err)
	}
	if sum, err := f.s.AgreementSummary(ctx, f.project.ID); err != nil || sum != nil {
		t.Errorf("AgreementSummary before any fit = %s, %v", sum, err)
	}
}

// release_items has no foreign key to items (migration 0003); these are
// the guarantees that stand in for it.
func TestReleaseItemsBelongToTheProject(t *testing.T) {
	ctx := context.Background()
	f, g := newFixture(t), newFixture(t)
	mine, err := f.s.InsertItems(ctx, f.project.ID, []store.NewItem{newItem("own.png", 1)})
	if err != nil {
		t.Fatal(err)
	}
	theirs, err := g.s.InsertItems(ctx, g.project.ID, []store.NewItem{newItem("other.png", 2)})
	if err != nil {
		t.Fatal(err)
	}
	own, other := mine[newItem("own.png", 0).SHA256], theirs[newItem("other.png", 0).SHA256]
	rel := store.Release{ProjectID: f.project.ID, Name: "v1", Seed: 1, SplitTrain: 80, SplitVal: 10, SplitTest: 10,
		Formats: "jsonl", ManifestSHA256: [32]byte{2}}
	item := func(id int64) store.ReleaseItem {
		return store.ReleaseItem{ItemID: id, Split: "train", LabelKey: "glass", Confidence: 1, GroupKey: "1"}
	}
	for name, items := range map[string][]store.ReleaseItem{
		"another project's item": {item(own), item(other)},
		"a missing item":         {item(own), item(other + 1_000_000)},
	} {
		if _, err := f.s.CreateRelease(ctx, rel, items); !errors.Is(err, store.ErrConflict) {
			t.Errorf("release naming %s: %v, want ErrConflict", name, err)
		}
	}
	if list, _ := f.s.Releases(ctx, f.project.ID); len(list) != 0 {
		t.Fatalf("a refused release was recorded: %+v", list)
	}
	got, err := f.s.CreateRelease(ctx, rel, []store.ReleaseItem{item(own)})
	if err != nil {
		t.Fatal(err)
	}
	if items, err := f.s.ReleaseItems(ctx, got.ID); err != nil || len(items) != 1 || items[0].ItemID != own {
		t.Errorf("ReleaseItems = %+v, %v", items, err)
	}
	if _, err := f.s.Pool().Exec(ctx, `DELETE FROM items WHERE id = $1`, own); err == nil || !strings.Contains(err.Error(), "named by a release") {
		t.Errorf("deleting an item a release names: %v, want the trigger's refusal", err)
	}
	if _, err := f.s.Pool().Exec(ctx, `DELETE FROM items WHERE id = $1`, other); err != nil {
		t.Errorf("deleting an item no release names: %v", err)
	}
	// Deleting the project cascades to its releases before the items' check runs.
	if _, err := f.s.Pool().Exec(ctx, `DELETE FROM projects WHERE id = $1`, f.project.ID); err != nil {
		t.Fatalf("deleting a project with a release: %v", err)
	}
	var left int
	if err := f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM release_items WHERE release_id = $1`, got.ID).Scan(&left); err != nil || left != 0 {
		t.Errorf("%d release items left after the project was deleted (%v)", left, err)
	}
}
