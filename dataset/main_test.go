package dataset_test

import (
	"context"
	"fmt"
	"os"
	"sync/atomic"
	"testing"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/blob"
	"github.com/concord-labs/concord/store/storetest"
)

var testDB *storetest.DB

func TestMain(m *testing.M) { os.Exit(storetest.Main(m, &testDB)) }

var projectSeq atomic.Int64

// newProject makes a fresh project with a recycling taxonomy, a blob
// folder and an importer on both.
func newProject(t testing.TB) (*store.Store, store.Project, *dataset.Importer) {
	t.Helper()
	ctx := context.Background()
	s := testDB.Open(t)
	p, err := s.CreateProject(ctx, store.Project{Slug: fmt.Sprintf("belt-%d", projectSeq.Add(1)), Name: "Sorting line", ReleaseSeed: 42})
	if err != nil {
		t.Fatal(err)
	}
	err = s.ReplaceTaxonomy(ctx, p.ID, []store.LabelInput{
		{Key: "plastic", Parent: -1},
		{Key: "pet-bottle", Name: "PET bottle", Parent: 0},
		{Key: "plastic-film", Name: "Plastic film", Parent: 0},
		{Key: "metal", Parent: -1},
		{Key: "aluminium-can", Name: "Aluminium can", Parent: 3},
		{Key: "glass", Parent: -1},
	})
	if err != nil {
		t.Fatal(err)
	}
	blobs, err := blob.NewLocal(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	return s, p, &dataset.Importer{Store: s, Blobs: blobs, BatchSize: 3}
}
