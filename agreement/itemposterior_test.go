package agreement

import (
	"math"
	"testing"
)

// After EM has converged, one more E-step with the fitted priors and
// matrices gives back the fit's own posterior: ItemPosterior must agree
// with the fit on every item of Dawid & Skene's (1979) Table 1 data (values
// recomputed, see TestDawidSkene1979Anaesthesia), including labeller 1's
// three votes per item.
func TestItemPosteriorMatchesFit(t *testing.T) {
	v := anaesthesiaVotes(t)
	res, err := DawidSkene(v, DawidSkeneOptions{Tolerance: 1e-15, MaxIterations: 10000})
	if err != nil {
		t.Fatal(err)
	}
	confs := make([][][]float64, v.NumItems)
	labels := make([][]int, v.NumItems)
	for i := range v.Item {
		it := v.Item[i]
		confs[it] = append(confs[it], res.ConfusionOf(int(v.Labeller[i])))
		labels[it] = append(labels[it], int(v.Label[i]))
	}
	for it := range v.NumItems {
		post, best := ItemPosterior(res.Prior, confs[it], labels[it])
		want := res.PosteriorOf(it)
		for k := range post {
			if math.Abs(post[k]-want[k]) > 1e-9 {
				t.Fatalf("item %d class %d: %v, fit says %v", it, k, post[k], want[k])
			}
		}
		if int32(best) != res.Label[it] {
			t.Errorf("item %d: best class %d, fit's label %d", it, best, res.Label[it])
		}
	}
	// No votes: the prior itself.
	post, _ := ItemPosterior([]float64{0.25, 0.75}, nil, nil)
	if math.Abs(post[0]-0.25) > 1e-12 || math.Abs(post[1]-0.75) > 1e-12 {
		t.Errorf("no votes: %v, want the prior", post)
	}
}
