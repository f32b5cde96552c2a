package dataset_test

import (
	"math/rand/v2"
	"testing"

	"github.com/concord-labs/concord/dataset"
)

// BenchmarkCluster1M clusters a million hashes: 900,000 distinct pictures
// and 100,000 near copies of them (up to 6 bits flipped).
func BenchmarkCluster1M(b *testing.B) {
	const n = 1_000_000
	rng := rand.New(rand.NewPCG(1, 2))
	hashes := make([]uint64, 0, n)
	for range n * 9 / 10 {
		hashes = append(hashes, rng.Uint64())
	}
	for len(hashes) < n {
		h := hashes[rng.IntN(n*9/10)]
		for range rng.IntN(7) {
			h ^= 1 << rng.IntN(64)
		}
		hashes = append(hashes, h)
	}
	ids := make([]int64, n)
	for i := range ids {
		ids[i] = int64(i + 1)
	}
	b.ResetTimer()
	for b.Loop() {
		if _, err := dataset.Cluster(ids, hashes, dataset.DefaultNearDuplicateDistance); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkPHash640x480(b *testing.B) {
	img := belt(640, 480, 3)
	for b.Loop() {
		dataset.PHash(img)
	}
}
