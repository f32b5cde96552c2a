package store_test

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"testing"

	"github.com/concord-labs/concord/store"
)

func newItem(name string, phash uint64) store.NewItem {
	sum := sha256.Sum256([]byte(name))
	return store.NewItem{SHA256: sum, FileKey: hex.EncodeToString(sum[:]), OriginalName: name,
		MediaType: "image/png", Bytes: 100, Width: 64, Height: 48, PHash: phash}
}

func TestInsertItemsSkipsKnownBytes(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	first, err := f.s.InsertItems(ctx, f.project.ID, []store.NewItem{newItem("a.png", 1), newItem("b.png", 1<<63)})
	if err != nil {
		t.Fatal(err)
	}
	if len(first) != 2 {
		t.Fatalf("inserted %d items, want 2", len(first))
	}
	again, err := f.s.InsertItems(ctx, f.project.ID, []store.NewItem{newItem("a.png", 1), newItem("c.png", 3)})
	if err != nil {
		t.Fatal(err)
	}
	if len(again) != 1 || again[newItem("c.png", 0).SHA256] == 0 {
		t.Fatalf("second batch inserted %v, want only c.png", again)
	}
	shas, err := f.s.ItemSHAs(ctx, f.project.ID)
	if err != nil || len(shas) != 3 {
		t.Fatalf("ItemSHAs = %d, %v; want 3", len(shas), err)
	}
	ids, hashes, _, err := f.s.PerceptualHashes(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	// A hash with the top bit set survives the trip through bigint.
	if len(hashes) != 3 || hashes[1] != 1<<63 {
		t.Errorf("hashes %x, want [1 8000000000000000 3]", hashes)
	}
	if err := f.s.SetClusters(ctx, f.project.ID, ids, []int64{ids[0], ids[0], ids[2]}); err != nil {
		t.Fatal(err)
	}
	clusters, members, err := f.s.ClusterCounts(ctx, f.project.ID)
	if err != nil || clusters != 1 || members != 2 {
		t.Errorf("ClusterCounts = %d, %d, %v; want 1 cluster of 2", clusters, members, err)
	}
	it, err := f.s.Item(ctx, f.project.ID, ids[1])
	if err != nil {
		t.Fatal(err)
	}
	if it.OriginalName != "b.png" || it.ClusterID == nil || *it.ClusterID != ids[0] || it.PHash == nil || *it.PHash != 1<<63 {
		t.Errorf("item = %+v", it)
	}
	page, err := f.s.Items(ctx, f.project.ID, store.ItemPage{AfterID: ids[0], Limit: 1})
	if err != nil || len(page) != 1 || page[0].ID != ids[1] {
		t.Errorf("Items page = %+v, %v", page, err)
	}
}
