package store_test

import (
	"context"
	"errors"
	"testing"

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
	pins, err := f.s.PriorSplits(ctx, f.project.ID, 9, 80, 10, 10)
	if err != nil || pins[a] != "test" || pins[b] != "train" {
		t.Errorf("PriorSplits = %v, %v", pins, err)
	}
	if other, _ := f.s.PriorSplits(ctx, f.project.ID, 10, 80, 10, 10); len(other) != 0 {
		t.Errorf("a release with another seed pins %v", other)
	}
	list, err := f.s.Releases(ctx, f.project.ID)
	if err != nil || len(list) != 1 || list[0].Name != "v1" {
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
