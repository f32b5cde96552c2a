package store_test

import (
	"context"
	"errors"
	"testing"

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
	if err := f.s.DeleteProject(ctx, f.project.ID); err != nil {
		t.Fatal(err)
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
