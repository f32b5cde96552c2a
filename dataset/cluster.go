package dataset

import (
	"fmt"
	"math/bits"
	"runtime"
	"sync"
	"sync/atomic"
)

// DefaultNearDuplicateDistance is the Hamming distance (of 64 bits) at or
// under which two perceptual hashes count as the same picture. Resized and
// re-quality JPEG copies of our test scenes land within 4 of each other,
// different scenes on the same belt 20 or more apart; 10 is the usual
// choice for 64-bit DCT hashes (common practice) and leaves room for crops
// of a few pixels.
const DefaultNearDuplicateDistance = 10

// MaxNearDuplicateDistance bounds the threshold: beyond it the index probes
// more neighbours than a scan would cost.
const MaxNearDuplicateDistance = 24

const (
	mihChunks    = 4  // 16-bit substrings of the 64-bit hash
	mihChunkBits = 16 // 65,536 buckets per substring
)

// Cluster groups hashes whose Hamming distance is at most maxDist, taking
// the transitive closure (a near-duplicate of a near-duplicate is in the
// same cluster), and returns for each hash its cluster's id: the smallest
// of ids over the cluster. ids and hashes run in parallel.
//
// It uses multi-index hashing (Norouzi, Punjani and Fleet, "Fast search in
// Hamming space with multi-index hashing", CVPR 2012): the hash is cut into
// four 16-bit substrings; if two hashes differ in at most maxDist bits, then
// by the pigeonhole principle some substring i differs in at most r_i bits,
// where the r_i+1 sum to maxDist+1. Each substring's buckets are joined
// with the buckets within r_i of them, so the work grows with the bucket
// sizes, not with all pairs.
func Cluster(ids []int64, hashes []uint64, maxDist int) ([]int64, error) {
	if len(ids) != len(hashes) {
		return nil, fmt.Errorf("cluster: %d ids but %d hashes", len(ids), len(hashes))
	}
	if maxDist < 0 || maxDist > MaxNearDuplicateDistance {
		return nil, fmt.Errorf("cluster: distance %d outside [0,%d]", maxDist, MaxNearDuplicateDistance)
	}
	n := len(hashes)
	workers := runtime.GOMAXPROCS(0)
	forests := make([]unionFind, workers)
	for w := range forests {
		forests[w] = newUnionFind(n)
	}
	units := maxDist + 1
	for chunk := range mihChunks {
		radius := units/mihChunks - 1
		if chunk < units%mihChunks {
			radius++
		}
		if radius < 0 {
			continue
		}
		idx := buildChunkIndex(hashes, chunk)
		masks := masksWithin(radius)
		const span = 1 << 10
		var next atomic.Int64
		var wg sync.WaitGroup
		for w := range workers {
			wg.Add(1)
			go func(uf unionFind) {
				defer wg.Done()
				for {
					lo := int(next.Add(span)) - span
					if lo >= 1<<mihChunkBits {
						return
					}
					idx.join(uf, masks, maxDist, lo, lo+span)
				}
			}(forests[w])
		}
		wg.Wait()
	}
	uf := forests[0]
	for _, other := range forests[1:] {
		for i := range n {
			if r := other.find(int32(i)); r != int32(i) {
				uf.union(int32(i), r)
			}
		}
	}
	minID := make(map[int32]int64)
	for i, id := range ids {
		r := uf.find(int32(i))
		if cur, ok := minID[r]; !ok || id < cur {
			minID[r] = id
		}
	}
	out := make([]int64, n)
	for i := range ids {
		out[i] = minID[uf.find(int32(i))]
	}
	return out, nil
}

// chunkIndex holds the hashes bucketed by one 16-bit substring, in
// compressed rows: bucket v is hash[start[v]:start[v+1]].
type chunkIndex struct {
	shift uint
	start []int32
	hash  []uint64
	pos   []int32 // index of each hash in the caller's slice
}

func buildChunkIndex(hashes []uint64, chunk int) *chunkIndex {
	shift := uint(chunk * mihChunkBits)
	ix := &chunkIndex{shift: shift, start: make([]int32, 1<<mihChunkBits+1),
		hash: make([]uint64, len(hashes)), pos: make([]int32, len(hashes))}
	for _, h := range hashes {
		ix.start[(h>>shift)&0xffff+1]++
	}
	for v := 1; v < len(ix.start); v++ {
		ix.start[v] += ix.start[v-1]
	}
	fill := append([]int32(nil), ix.start[:1<<mihChunkBits]...)
	for i, h := range hashes {
		v := (h >> shift) & 0xffff
		ix.hash[fill[v]] = h
		ix.pos[fill[v]] = int32(i)
		fill[v]++
	}
	return ix
}

// join unions every pair within maxDist whose substring values v (in
// [lo,hi)) and v^mask differ by a mask of masks; each bucket pair is
// visited once, from its smaller value.
func (ix *chunkIndex) join(uf unionFind, masks []uint16, maxDist, lo, hi int) {
	for v := lo; v < hi; v++ {
		a0, a1 := ix.start[v], ix.start[v+1]
		if a0 == a1 {
			continue
		}
		for _, m := range masks {
			w := v ^ int(m)
			if w < v {
				continue
			}
			b0, b1 := ix.start[w], ix.start[w+1]
			for a := a0; a < a1; a++ {
				ha := ix.hash[a]
				from := b0
				if w == v {
					from = a + 1
				}
				for b := from; b < b1; b++ {
					if bits.OnesCount64(ha^ix.hash[b]) <= maxDist {
						uf.union(ix.pos[a], ix.pos[b])
					}
				}
			}
		}
	}
}

// masksWithin lists the 16-bit masks with at most r bits set.
func masksWithin(r int) []uint16 {
	var out []uint16
	for m := 0; m < 1<<mihChunkBits; m++ {
		if bits.OnesCount16(uint16(m)) <= r {
			out = append(out, uint16(m))
		}
	}
	return out
}

// unionFind is a disjoint-set forest with path halving; roots are the
// smallest index of their set, so merging forests is order-free.
type unionFind []int32

func newUnionFind(n int) unionFind {
	uf := make(unionFind, n)
	for i := range uf {
		uf[i] = int32(i)
	}
	return uf
}

func (uf unionFind) find(x int32) int32 {
	for uf[x] != x {
		uf[x] = uf[uf[x]]
		x = uf[x]
	}
	return x
}

func (uf unionFind) union(a, b int32) {
	ra, rb := uf.find(a), uf.find(b)
	switch {
	case ra < rb:
		uf[rb] = ra
	case rb < ra:
		uf[ra] = rb
	}
}
