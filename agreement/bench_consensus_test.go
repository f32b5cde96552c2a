package agreement

import (
	"math/rand/v2"
	"runtime"
	"testing"
	"time"
)

// simulation draws votes from labellers with known confusion matrices.
type simulation struct {
	votes *Votes
	truth []int32
}

// simulate gives each of items perItem votes from distinct labellers picked
// at random. conf[l] is labeller l's K x K matrix (rows: true class); true
// classes are drawn from prior. Seeded, so every run sees the same votes.
func simulate(seed uint64, items, perItem int, conf [][]float64, prior []float64) simulation {
	k := len(prior)
	rng := rand.New(rand.NewPCG(seed, 0x636f6e636f7264))
	cum := func(p []float64) []float64 {
		out := make([]float64, len(p))
		s := 0.0
		for i, x := range p {
			s += x
			out[i] = s
		}
		return out
	}
	draw := func(c []float64) int32 {
		u := rng.Float64() * c[len(c)-1]
		for i, x := range c {
			if u < x {
				return int32(i)
			}
		}
		return int32(len(c) - 1)
	}
	cp := cum(prior)
	rows := make([][]float64, len(conf)*k)
	for l, m := range conf {
		for t := 0; t < k; t++ {
			rows[l*k+t] = cum(m[t*k : (t+1)*k])
		}
	}
	n := items * perItem
	s := simulation{
		votes: &Votes{NumItems: items, NumLabellers: len(conf), NumClasses: k,
			Item: make([]int32, 0, n), Labeller: make([]int32, 0, n), Label: make([]int32, 0, n)},
		truth: make([]int32, items),
	}
	picked := make([]int32, 0, perItem)
	for it := 0; it < items; it++ {
		t := draw(cp)
		s.truth[it] = t
		picked = picked[:0]
	pick:
		for len(picked) < perItem {
			l := int32(rng.IntN(len(conf)))
			for _, p := range picked {
				if p == l {
					continue pick
				}
			}
			picked = append(picked, l)
			s.votes.Item = append(s.votes.Item, int32(it))
			s.votes.Labeller = append(s.votes.Labeller, l)
			s.votes.Label = append(s.votes.Label, draw(rows[int(l)*k+int(t)]))
		}
	}
	return s
}

// symmetricConfusion is a K x K matrix with acc on the diagonal and the
// rest spread evenly.
func symmetricConfusion(k int, acc float64) []float64 {
	m := make([]float64, k*k)
	for t := 0; t < k; t++ {
		for j := 0; j < k; j++ {
			m[t*k+j] = (1 - acc) / float64(k-1)
		}
		m[t*k+t] = acc
	}
	return m
}

// millionVotes is the benchmark shape: 100,000 items x 10 votes from 500
// labellers over 20 classes, accuracies spread from 0.35 to 0.95.
func millionVotes() simulation {
	const items, perItem, labellers, k = 100_000, 10, 500, 20
	conf := make([][]float64, labellers)
	for l := range conf {
		conf[l] = symmetricConfusion(k, 0.35+0.6*float64(l)/float64(labellers-1))
	}
	prior := make([]float64, k)
	for t := range prior {
		prior[t] = float64(t + 1)
	}
	return simulate(42, items, perItem, conf, prior)
}

// benchRun times run on the 1M-vote shape and reports wall time and bytes
// allocated per run as extra metrics, beside -benchmem's figures.
func benchRun(b *testing.B, run func(v *Votes) error) {
	s := millionVotes()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	b.ResetTimer()
	start := time.Now()
	for i := 0; i < b.N; i++ {
		if err := run(s.votes); err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	runtime.ReadMemStats(&after)
	b.ReportMetric(float64(time.Since(start).Milliseconds())/float64(b.N), "ms/run")
	b.ReportMetric(float64(after.TotalAlloc-before.TotalAlloc)/float64(b.N)/(1<<20), "MiB-alloc/run")
}

func BenchmarkDawidSkene1M(b *testing.B) {
	iterations := 0
	benchRun(b, func(v *Votes) error {
		res, err := DawidSkene(v, DawidSkeneOptions{})
		if err == nil {
			iterations = res.Iterations
		}
		return err
	})
	b.ReportMetric(float64(iterations), "iterations")
}

func BenchmarkMajority1M(b *testing.B) {
	benchRun(b, func(v *Votes) error {
		_, err := MajorityVote(v)
		return err
	})
}
