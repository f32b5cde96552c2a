package store_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"github.com/concord-labs/concord/store"
)

func TestDeleteProject(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	ids, err := f.s.InsertItems(ctx, f.project.ID, []store.NewItem{{
		SHA256: [32]byte{1, 2, 3}, FileKey: "k", OriginalName: "belt-0001.jpg", MediaType: "image/jpeg",
		Bytes: 10, Width: 4, Height: 3,
	}})
	if err != nil || len(ids) != 1 {
		t.Fatalf("insert item: %v, %v", ids, err)
	}
	// A vote, a known answer and a consensus row all name a label of the
	// project, which is what a plain cascade trips over.
	item := ids[[32]byte{1, 2, 3}]
	c, err := f.s.ClaimNext(ctx, store.ClaimRequest{ProjectID: f.project.ID, LabellerID: f.labellers[0].ID, Lifetime: time.Minute})
	if err != nil || c.Item.ID != item {
		t.Fatalf("claim: %+v, %v", c, err)
	}
	glass := f.labels["glass"].ID
	if _, err := f.s.RecordVote(ctx, store.NewVote{ID: "00000000-0000-8000-8000-000000000001", ProjectID: f.project.ID,
		ItemID: item, LabellerID: f.labellers[0].ID, LabelID: &glass, Seconds: 3}, nil); err != nil {
		t.Fatal(err)
	}
	if err := f.s.SetGoldAnswer(ctx, f.project.ID, item, glass, store.GoldSourceGold, nil); err != nil {
		t.Fatal(err)
	}
	if err := f.s.DeleteProject(ctx, f.project.ID); err != nil {
		t.Fatal(err)
	}
	if n, _, err := f.s.VoteTotals(ctx, f.project.ID); err != nil || n != 0 {
		t.Errorf("votes after delete: %d, %v", n, err)
	}
	if _, err := f.s.ProjectByID(ctx, f.project.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("project after delete: %v, want ErrNotFound", err)
	}
	if _, err := f.s.Item(ctx, f.project.ID, ids[[32]byte{1, 2, 3}]); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("item after delete: %v, want ErrNotFound", err)
	}
	// The people stay: they may work on other projects.
	if _, err := f.s.UserByID(ctx, f.labellers[0].ID); err != nil {
		t.Errorf("labeller after delete: %v", err)
	}
	if err := f.s.DeleteProject(ctx, f.project.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("second delete: %v, want ErrNotFound", err)
	}
}
