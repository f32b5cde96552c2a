package dataset_test

import (
	"image"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/concord-labs/concord/dataset"
)

func TestPHashNearDuplicates(t *testing.T) {
	orig := belt(320, 240, 1)
	base := dataset.PHash(orig)
	copies := map[string]image.Image{
		"jpeg q90":              decode(t, encodeJPEG(t, orig, 90)),
		"jpeg q30":              decode(t, encodeJPEG(t, orig, 30)),
		"half size":             resized(orig, 160, 120),
		"double size, jpeg q60": decode(t, encodeJPEG(t, resized(orig, 640, 480), 60)),
		"thumbnail 64x48, png":  decode(t, encodePNG(t, resized(orig, 64, 48))),
		"odd size 301x227, q75": decode(t, encodeJPEG(t, resized(orig, 301, 227), 75)),
	}
	for name, img := range copies {
		if d := dataset.Distance(base, dataset.PHash(img)); d > dataset.DefaultNearDuplicateDistance {
			t.Errorf("%s: distance %d to the original, want <= %d", name, d, dataset.DefaultNearDuplicateDistance)
		}
	}
	for scene := 2; scene < 40; scene++ {
		other := dataset.PHash(belt(320, 240, scene))
		if d := dataset.Distance(base, other); d <= dataset.DefaultNearDuplicateDistance {
			t.Errorf("scene %d: distance %d to scene 1, want > %d (a different picture)", scene, d, dataset.DefaultNearDuplicateDistance)
		}
	}
}

func TestClusterMergesCopiesOnly(t *testing.T) {
	var ids []int64
	var hashes []uint64
	add := func(img image.Image) {
		ids = append(ids, int64(len(ids)+1))
		hashes = append(hashes, dataset.PHash(img))
	}
	a, b := belt(320, 240, 7), belt(320, 240, 8)
	add(a)                                                  // id 1
	add(b)                                                  // id 2
	add(decode(t, encodeJPEG(t, resized(a, 200, 150), 50))) // id 3: copy of 1
	add(belt(320, 240, 9))                                  // id 4
	add(decode(t, encodeJPEG(t, b, 40)))                    // id 5: copy of 2
	got, err := dataset.Cluster(ids, hashes, dataset.DefaultNearDuplicateDistance)
	if err != nil {
		t.Fatal(err)
	}
	if want := []int64{1, 2, 1, 4, 2}; !slices.Equal(got, want) {
		t.Errorf("clusters %v, want %v", got, want)
	}
}

// TestClusterMatchesAllPairs checks the index against the definition: the
// connected components of the graph joining hashes within the distance.
func TestClusterMatchesAllPairs(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, maxDist := range []int{0, 2, 5, 10, 16} {
		var hashes []uint64
		for range 600 {
			h := rng.Uint64()
			hashes = append(hashes, h)
			// Plant near copies at distances around the threshold.
			for range rng.IntN(3) {
				c := h
				for range rng.IntN(maxDist + 3) {
					c ^= 1 << rng.IntN(64)
				}
				hashes = append(hashes, c)
			}
		}
		ids := make([]int64, len(hashes))
		for i := range ids {
			ids[i] = int64(1000 - i) // descending, so "smallest id" is not "first index"
		}
		got, err := dataset.Cluster(ids, hashes, maxDist)
		if err != nil {
			t.Fatal(err)
		}
		want := allPairsClusters(ids, hashes, maxDist)
		if !slices.Equal(got, want) {
			t.Errorf("maxDist %d: index and all-pairs disagree", maxDist)
		}
	}
}

func allPairsClusters(ids []int64, hashes []uint64, maxDist int) []int64 {
	parent := make([]int, len(ids))
	for i := range parent {
		parent[i] = i
	}
	var find func(int) int
	find = func(x int) int {
		if parent[x] != x {
			parent[x] = find(parent[x])
		}
		return parent[x]
	}
	for i := range hashes {
		for j := i + 1; j < len(hashes); j++ {
			if dataset.Distance(hashes[i], hashes[j]) <= maxDist {
				parent[find(i)] = find(j)
			}
		}
	}
	minID := map[int]int64{}
	for i, id := range ids {
		r := find(i)
		if m, ok := minID[r]; !ok || id < m {
			minID[r] = id
		}
	}
	out := make([]int64, len(ids))
	for i := range ids {
		out[i] = minID[find(i)]
	}
	return out
}

func TestClusterRejectsBadInput(t *testing.T) {
	if _, err := dataset.Cluster([]int64{1}, nil, 10); err == nil {
		t.Error("mismatched lengths accepted")
	}
	if _, err := dataset.Cluster(nil, nil, dataset.MaxNearDuplicateDistance+1); err == nil {
		t.Error("distance over the maximum accepted")
	}
}
