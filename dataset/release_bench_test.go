package dataset_test

import (
	"context"
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"github.com/concord-labs/concord/dataset"
)

// BenchmarkRelease1M computes a release of a million items from memory:
// groups, splits, labels (half of them from a posterior), both manifests,
// release.json, the card and the checksums.
func BenchmarkRelease1M(b *testing.B) {
	in := benchInput(1_000_000)
	b.ResetTimer()
	for b.Loop() {
		rel, err := dataset.BuildRelease(in)
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(len(rel.Rows)), "rows")
	}
}

// benchInput is a project of n items on a recycling taxonomy: a tenth near
// copies, a few manifest groups, half the labels from a posterior.
func benchInput(n int) dataset.ReleaseInput {
	nodes := []dataset.TaxNode{
		{ID: 1, Key: "plastic", Name: "Plastic", Depth: 0},
		{ID: 2, ParentID: 1, Key: "pet-bottle", Name: "PET bottle", Depth: 1, IsLeaf: true},
		{ID: 3, ParentID: 1, Key: "plastic-film", Name: "Plastic film", Depth: 1, IsLeaf: true},
		{ID: 4, Key: "metal", Name: "Metal", Depth: 0},
		{ID: 5, ParentID: 4, Key: "aluminium-can", Name: "Aluminium can", Depth: 1, IsLeaf: true},
		{ID: 6, Key: "paper", Name: "Paper", Depth: 0},
		{ID: 7, ParentID: 6, Key: "cardboard", Name: "Cardboard", Depth: 1, IsLeaf: true},
		{ID: 8, Key: "glass", Name: "Glass", Depth: 0, IsLeaf: true},
		{ID: 9, Key: "residual-waste", Name: "Residual waste", Depth: 0, IsLeaf: true},
	}
	leaves := []int64{2, 3, 5, 7, 8, 9}
	rng := rand.New(rand.NewPCG(5, 6))
	items := make([]dataset.Candidate, n)
	for i := range items {
		id := int64(i + 1)
		c := dataset.Candidate{ID: id, MediaType: "image/jpeg", ClusterID: id, Votes: 3}
		c.SHA256[0], c.SHA256[1], c.SHA256[2] = byte(i), byte(i>>8), byte(i>>16)
		if i%10 == 9 {
			c.ClusterID = id - 1 // a tenth are near copies of the item before
		}
		if i%1000 < 5 {
			c.GroupKey = fmt.Sprint("bin-", i/1000)
		}
		l := leaves[rng.IntN(len(leaves))]
		if i%2 == 0 {
			c.Vote = dataset.Vote{LabelID: l, Confidence: 0.9 + 0.1*rng.Float64()}
		} else {
			c.Vote = dataset.Vote{PosteriorLabels: []int64{l, leaves[0]}, Posterior: []float64{0.97, 0.03}}
		}
		items[i] = c
	}
	return dataset.ReleaseInput{Params: params("bench"), Items: items, Taxonomy: nodes}
}

// BenchmarkImportSmallPNG imports 64x64 PNGs into the test database,
// a batch of 200 per iteration; images/s is the import rate.
func BenchmarkImportSmallPNG(b *testing.B) {
	ctx := context.Background()
	_, p, im := newProject(b)
	im.BatchSize = dataset.DefaultBatchSize
	k := 0
	for b.Loop() {
		b.StopTimer()
		dir := filepath.Join(b.TempDir(), fmt.Sprint(k))
		for range 200 {
			writeFile(b, filepath.Join(dir, fmt.Sprintf("%06d.png", k)), encodePNG(b, belt(64, 64, k)))
			k++
		}
		b.StartTimer()
		rep, err := im.ImportPath(ctx, p.ID, dir)
		if err != nil || rep.Imported != 200 {
			b.Fatalf("imported %d: %v", rep.Imported, err)
		}
	}
	b.ReportMetric(float64(k)/b.Elapsed().Seconds(), "images/s")
}

// BenchmarkReleaseDB1M cuts a release of a project of a million items in
// the test database: loading items with consensus, computing, and recording
// the release with its items in one transaction (files are not written).
func BenchmarkReleaseDB1M(b *testing.B) {
	ctx := context.Background()
	s, p, _ := newProject(b)
	labels, err := s.Labels(ctx, p.ID)
	if err != nil {
		b.Fatal(err)
	}
	var leaves []int64
	for _, l := range labels {
		if l.IsLeaf {
			leaves = append(leaves, l.ID)
		}
	}
	_, err = s.Pool().Exec(ctx, `
		INSERT INTO items (project_id, sha256, file_key, media_type, bytes, width, height, cluster_id)
		SELECT $1, sha256(int8send(g)), encode(sha256(int8send(g)), 'hex'), 'image/jpeg', 1000, 64, 64, NULL
		FROM generate_series(1, 1000000) g`, p.ID)
	if err != nil {
		b.Fatal(err)
	}
	_, err = s.Pool().Exec(ctx, `
		INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count)
		SELECT id, project_id, ($2::bigint[])[1 + id % cardinality($2::bigint[])], 0.9 + (id % 10) / 100.0, 'ds', 3
		FROM items WHERE project_id = $1`, p.ID, leaves)
	if err != nil {
		b.Fatal(err)
	}
	r := &dataset.Releaser{Store: s}
	k := 0
	for b.Loop() {
		k++
		rel, _, err := r.Create(ctx, p.ID, params(fmt.Sprint("db-", k)), nil)
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(len(rel.Rows)), "rows")
	}
}
