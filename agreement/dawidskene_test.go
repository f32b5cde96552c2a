package agreement

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

func atoi(t testing.TB, s string) int {
	t.Helper()
	n, err := strconv.Atoi(s)
	if err != nil {
		t.Fatalf("reference data: %v", err)
	}
	return n
}

func atof(t testing.TB, s string) float64 {
	t.Helper()
	x, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("reference data: %v", err)
	}
	return x
}

// anaesthesiaVotes loads Dawid & Skene's (1979) Table 1 as dense votes.
// Labeller 1's three ratings per patient stay three separate votes, as in
// the paper, which is why this bypasses Builder (it keeps one per pair).
func anaesthesiaVotes(t testing.TB) *Votes {
	v := &Votes{NumItems: 45, NumLabellers: 5, NumClasses: 4}
	for _, r := range refRows(t, "dawid_skene1979_anaesthesia_long.csv") {
		v.Item = append(v.Item, int32(atoi(t, r[0])-1))
		v.Labeller = append(v.Labeller, int32(atoi(t, r[1])-1))
		v.Label = append(v.Label, int32(atoi(t, r[2])-1))
	}
	return v
}

// The expected values are recomputed, not published: the reference README
// (section 5) ran plain ML EM from the paper's eq. (3.1) start, because the
// paper's own estimates were not available. They check this implementation
// against an independent one on Dawid & Skene's (1979) Table 1 data.
func TestDawidSkene1979Anaesthesia(t *testing.T) {
	v := anaesthesiaVotes(t)
	res, err := DawidSkene(v, DawidSkeneOptions{NoSmoothing: true, Tolerance: 1e-15, MaxIterations: 10000})
	if err != nil {
		t.Fatal(err)
	}
	const wantMAP = "142222132243121111222222112111131224233111212"
	var got strings.Builder
	for _, c := range res.Label {
		got.WriteString(strconv.Itoa(int(c) + 1))
	}
	if got.String() != wantMAP {
		t.Errorf("MAP classes\n got %s\nwant %s", got.String(), wantMAP)
	}
	wantPrior := []float64{0.399555, 0.421983, 0.111795, 0.066667}
	for k, p := range wantPrior {
		if math.Abs(res.Prior[k]-p) > 1e-4 {
			t.Errorf("prior %d = %.6f, want %.6f", k+1, res.Prior[k], p)
		}
	}
	if math.Abs(res.LogLikelihood-(-192.890881)) > 1e-4 {
		t.Errorf("log-likelihood %.6f, want -192.890881", res.LogLikelihood)
	}
	for _, r := range refRows(t, "dawid_skene1979_em_posteriors.csv") {
		item := atoi(t, r[0]) - 1
		for k := 0; k < 4; k++ {
			if want, got := atof(t, r[1+k]), res.PosteriorOf(item)[k]; math.Abs(got-want) > 1e-4 {
				t.Errorf("item %d class %d posterior %.6f, want %.6f", item+1, k+1, got, want)
			}
		}
	}
	for _, r := range refRows(t, "dawid_skene1979_em_error_rates.csv") {
		l, tc, j := atoi(t, r[0])-1, atoi(t, r[1])-1, atoi(t, r[2])-1
		if want, got := atof(t, r[3]), res.ConfusionOf(l)[tc*4+j]; math.Abs(got-want) > 1e-4 {
			t.Errorf("labeller %d true %d label %d: %.6f, want %.6f", l+1, tc+1, j+1, got, want)
		}
	}
	if !res.Converged {
		t.Errorf("did not converge in %d iterations", res.Iterations)
	}
}

// crowdSet loads one of the real crowd sets through Builder, with gold
// answers as item id -> class id.
func crowdSet(t testing.TB, name string) (*Votes, map[int]int) {
	t.Helper()
	b := NewBuilder()
	for i, r := range refRows(t, "crowd/"+name+"/votes.csv") {
		if dup, err := b.Add(r[0], r[1], r[2], -1); err != nil || dup {
			t.Fatalf("%s votes.csv line %d: dup %v err %v", name, i+2, dup, err)
		}
	}
	gold := make(map[int]int)
	for i, r := range refRows(t, "crowd/"+name+"/gold.csv") {
		item, ok1 := b.ItemID(r[0])
		class, ok2 := b.ClassID(r[1])
		if !ok1 || !ok2 {
			t.Fatalf("%s gold.csv line %d: unknown item or label %v", name, i+2, r)
		}
		gold[item] = class
	}
	return b.Build(), gold
}

// majorityAccuracy counts a tied item as 1/(number tied) correct when gold
// is among the tied labels: the expected accuracy under random
// tie-breaking, the convention of the crowd sets' SOURCE.md figures.
func majorityAccuracy(m *Majority, gold map[int]int) float64 {
	sum := 0.0
	for item, g := range gold {
		if tied := m.TiedLabels(item); tied != nil {
			for _, c := range tied {
				if c == g {
					sum += 1 / float64(len(tied))
				}
			}
		} else if int(m.Label[item]) == g {
			sum++
		}
	}
	return sum / float64(len(gold))
}

func labelAccuracy(label []int32, gold map[int]int) float64 {
	right := 0
	for item, g := range gold {
		if int(label[item]) == g {
			right++
		}
	}
	return float64(right) / float64(len(gold))
}

// Reference accuracies are the figures computed in each set's SOURCE.md
// (not published; DS there used 0.01 smoothing and 50 iterations). The
// published comparison, Zheng et al. (2017, PVLDB 10(5)), finds DS ahead of
// majority vote where labellers differ in skill, as on bluebirds.
func TestDawidSkeneCrowdSets(t *testing.T) {
	for _, tc := range []struct {
		name         string
		wantMV, want float64
	}{
		{"bluebirds", 0.7593, 0.8981},
		{"rte", 0.8969, 0.9275},
		{"temp", 0.9361, 0.9416},
	} {
		t.Run(tc.name, func(t *testing.T) {
			v, gold := crowdSet(t, tc.name)
			m, err := MajorityVote(v)
			if err != nil {
				t.Fatal(err)
			}
			if got := majorityAccuracy(m, gold); math.Abs(got-tc.wantMV) > 5e-4 {
				t.Errorf("majority accuracy %.4f, want %.4f", got, tc.wantMV)
			}
			res, err := DawidSkene(v, DawidSkeneOptions{Smoothing: 0.01}) // the settings SOURCE.md used
			if err != nil {
				t.Fatal(err)
			}
			got := labelAccuracy(res.Label, gold)
			t.Logf("DS accuracy %.4f (reference %.4f) after %d iterations", got, tc.want, res.Iterations)
			if math.Abs(got-tc.want) > 5e-4 {
				t.Errorf("DS accuracy %.4f, want %.4f", got, tc.want)
			}
			if got <= majorityAccuracy(m, gold) {
				t.Errorf("DS %.4f below majority vote", got)
			}
		})
	}
}

// Identical labellers agree on everything, so both methods must return
// their shared label with confidence near 1.
func TestIdenticalLabellersAgree(t *testing.T) {
	const k = 4
	v := &Votes{NumItems: 40, NumLabellers: 5, NumClasses: k}
	for item := 0; item < v.NumItems; item++ {
		for l := 0; l < v.NumLabellers; l++ {
			v.Item = append(v.Item, int32(item))
			v.Labeller = append(v.Labeller, int32(l))
			v.Label = append(v.Label, int32(item%k))
		}
	}
	m, err := MajorityVote(v)
	if err != nil {
		t.Fatal(err)
	}
	res, err := DawidSkene(v, DawidSkeneOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for item := 0; item < v.NumItems; item++ {
		want := int32(item % k)
		if m.Label[item] != want || res.Label[item] != want {
			t.Fatalf("item %d: majority %d, DS %d, want %d", item, m.Label[item], res.Label[item], want)
		}
		if res.Confidence[item] < 0.999 || m.Confidence[item] != 1 {
			t.Fatalf("item %d: DS confidence %v, majority %v", item, res.Confidence[item], m.Confidence[item])
		}
	}
}

// Renaming the classes must rename the answer and change nothing else.
func TestDawidSkenePermutationInvariant(t *testing.T) {
	const k = 5
	conf := make([][]float64, 30)
	for l := range conf {
		conf[l] = symmetricConfusion(k, 0.45+0.5*float64(l%6)/5)
	}
	s := simulate(7, 300, 5, conf, []float64{0.4, 0.25, 0.15, 0.1, 0.1})
	perm := []int32{3, 0, 4, 1, 2}
	pv := *s.votes
	pv.Label = make([]int32, len(s.votes.Label))
	for i, c := range s.votes.Label {
		pv.Label[i] = perm[c]
	}
	a, err := DawidSkene(s.votes, DawidSkeneOptions{})
	if err != nil {
		t.Fatal(err)
	}
	b, err := DawidSkene(&pv, DawidSkeneOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if a.Iterations != b.Iterations {
		t.Errorf("iterations %d vs %d", a.Iterations, b.Iterations)
	}
	for item := 0; item < s.votes.NumItems; item++ {
		if perm[a.Label[item]] != b.Label[item] {
			t.Fatalf("item %d: label %d became %d, want %d", item, a.Label[item], b.Label[item], perm[a.Label[item]])
		}
		for c := 0; c < k; c++ {
			if d := a.PosteriorOf(item)[c] - b.PosteriorOf(item)[perm[c]]; math.Abs(d) > 1e-9 {
				t.Fatalf("item %d class %d: posterior differs by %g", item, c, d)
			}
		}
	}
	for c := 0; c < k; c++ {
		if d := a.Prior[c] - b.Prior[perm[c]]; math.Abs(d) > 1e-9 {
			t.Errorf("prior %d differs by %g", c, d)
		}
	}
}

// With known confusion matrices, EM must find them again and beat majority
// vote, because it learns to discount the three bad labellers.
func TestDawidSkeneRecoversSimulatedLabellers(t *testing.T) {
	const k = 3
	conf := make([][]float64, 12)
	for l := range conf {
		conf[l] = symmetricConfusion(k, 0.9)
	}
	// Three poor labellers: one near random, two with a favourite label.
	conf[9] = symmetricConfusion(k, 0.4)
	conf[10] = []float64{0.9, 0.1, 0, 0.6, 0.4, 0, 0.6, 0, 0.4}
	conf[11] = []float64{0.3, 0.1, 0.6, 0.1, 0.3, 0.6, 0.05, 0.05, 0.9}
	s := simulate(11, 4000, 5, conf, []float64{0.5, 0.3, 0.2})
	m, err := MajorityVote(s.votes)
	if err != nil {
		t.Fatal(err)
	}
	res, err := DawidSkene(s.votes, DawidSkeneOptions{})
	if err != nil {
		t.Fatal(err)
	}
	// Compare with the matrices the drawn votes actually show (sampling
	// noise alone moves a cell by ~0.02), and loosely with the true ones.
	seen := make([]float64, len(conf)*k*k)
	for i, item := range s.votes.Item {
		seen[(int(s.votes.Labeller[i])*k+int(s.truth[item]))*k+int(s.votes.Label[i])]++
	}
	for l, want := range conf {
		got := res.ConfusionOf(l)
		for t0 := 0; t0 < k; t0++ {
			row := seen[(l*k+t0)*k : (l*k+t0+1)*k]
			n := row[0] + row[1] + row[2]
			for j := 0; j < k; j++ {
				i := t0*k + j
				if math.Abs(got[i]-row[j]/n) > 0.03 || math.Abs(got[i]-want[i]) > 0.08 {
					t.Errorf("labeller %d cell %d: %.3f, drawn %.3f, true %.3f", l, i, got[i], row[j]/n, want[i])
				}
			}
		}
	}
	gold := make(map[int]int, len(s.truth))
	for item, c := range s.truth {
		gold[item] = int(c)
	}
	mv, ds := majorityAccuracy(m, gold), labelAccuracy(res.Label, gold)
	t.Logf("accuracy: majority %.4f, Dawid-Skene %.4f", mv, ds)
	if ds < mv+0.01 {
		t.Errorf("Dawid-Skene %.4f does not beat majority vote %.4f", ds, mv)
	}
}

// Fixed items keep their class whatever the votes say, and say so with a
// one-hot posterior.
func TestDawidSkeneFixedItems(t *testing.T) {
	v := anaesthesiaVotes(t)
	// Item 1 (id 0) is unanimous class 1 in the data; fix it to class 3.
	res, err := DawidSkene(v, DawidSkeneOptions{Fixed: map[int]int{0: 2}})
	if err != nil {
		t.Fatal(err)
	}
	if res.Label[0] != 2 || res.Confidence[0] != 1 {
		t.Errorf("fixed item: label %d confidence %v, want 2 and 1", res.Label[0], res.Confidence[0])
	}
	if _, err := DawidSkene(v, DawidSkeneOptions{Fixed: map[int]int{0: 4}}); err == nil {
		t.Error("fixed class 4 of 4 accepted")
	}
}

// The answer must not depend on how many goroutines ran it.
func TestDawidSkeneWorkersDeterministic(t *testing.T) {
	conf := make([][]float64, 40)
	for l := range conf {
		conf[l] = symmetricConfusion(6, 0.3+0.6*float64(l)/39)
	}
	s := simulate(3, 9000, 4, conf, []float64{1, 1, 1, 1, 1, 1})
	one, err := DawidSkene(s.votes, DawidSkeneOptions{Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	many, err := DawidSkene(s.votes, DawidSkeneOptions{Workers: 7})
	if err != nil {
		t.Fatal(err)
	}
	if one.LogLikelihood != many.LogLikelihood {
		t.Fatalf("log-likelihood %v with 1 worker, %v with 7", one.LogLikelihood, many.LogLikelihood)
	}
	for i := range one.Posterior {
		if one.Posterior[i] != many.Posterior[i] {
			t.Fatalf("posterior cell %d differs", i)
		}
	}
}

// Gold must take part in EM, not be pasted over the answer afterwards: it is
// what teaches the fit what a labeller's votes mean. Two experienced sorters
// and a new one see 20 items together, 10 glass (class 0) and 10 PET bottle
// (class 1), and all three vote right. The new sorter alone sees 7 more and
// calls them all PET; gold says the first 6 of those are glass. Item 26 is
// the seventh. a = 0.1 is the smoothing, q item 26's posterior of glass, S
// the summed posterior of glass over her 7 items of her own.
//
// Without gold her glass row is (S+a)/(10+S+2a) for PET; the glass prior is
// (10+S+a)/(27+2a), PET's (17-S+a)/(27+2a), and her P(PET | PET) is about
// 1. EM starts at S = 0 and climbs to the first fixed point S = 7q: with
// q <= 0.02 the odds of glass are at most (10.24/16.86)*(0.24/10.34) =
// 0.014, so q stays below 0.02 and her P(PET | glass) below 0.24/10.2.
//
// With gold S = 6+q, so P(PET | glass) >= 6.1/16.2 = 0.377, and the odds of
// glass are at least (16.1/11.1)*(6.1/16.2) = 0.546: q >= 0.35.
func TestDawidSkeneFixedItemsAnchorTheFit(t *testing.T) {
	const glass, pet, newSorter, target = 0, 1, 2, 26
	v := &Votes{NumItems: 27, NumLabellers: 3, NumClasses: 2}
	vote := func(item, l, c int) {
		v.Item, v.Labeller, v.Label = append(v.Item, int32(item)), append(v.Labeller, int32(l)), append(v.Label, int32(c))
	}
	for item := range 20 {
		for l := range 3 {
			vote(item, l, item%2)
		}
	}
	fixed := map[int]int{}
	for item := 20; item < 27; item++ {
		vote(item, newSorter, pet)
		if item != target {
			fixed[item] = glass
		}
	}
	free, err := DawidSkene(v, DawidSkeneOptions{})
	if err != nil {
		t.Fatal(err)
	}
	held, err := DawidSkene(v, DawidSkeneOptions{Fixed: fixed})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("P(vote PET | glass) %.4f -> %.4f; item %d P(glass) %.4f -> %.4f",
		free.ConfusionOf(newSorter)[glass*2+pet], held.ConfusionOf(newSorter)[glass*2+pet], target, free.PosteriorOf(target)[glass], held.PosteriorOf(target)[glass])
	if got := free.ConfusionOf(newSorter)[glass*2+pet]; got > 0.24/10.2 {
		t.Errorf("without gold: P(vote PET | glass) = %.4f, want below 0.24/10.2 = 0.0235", got)
	}
	if got := free.PosteriorOf(target)[glass]; got > 0.02 {
		t.Errorf("without gold: item %d P(glass) = %.4f, want below 0.02", target, got)
	}
	if got := held.ConfusionOf(newSorter)[glass*2+pet]; got < 6.1/16.2 {
		t.Errorf("gold held: P(vote PET | glass) = %.4f, want at least 6.1/16.2 = 0.377", got)
	}
	if got := held.PosteriorOf(target)[glass]; got < 0.35 {
		t.Errorf("gold held: item %d P(glass) = %.4f, want at least 0.35", target, got)
	}
	for item := range fixed {
		if held.Label[item] != glass || held.Confidence[item] != 1 {
			t.Errorf("gold item %d: label %d confidence %v, want glass and 1", item, held.Label[item], held.Confidence[item])
		}
	}
}

// Smoothing keeps a labeller with one vote from getting zero cells: with
// counts only in her voted column j, a row t she may have seen is
// (q_t+a)/(q_t+K*a) at j and a/(q_t+K*a) elsewhere (q_t <= 1 her item's
// posterior of t), so every cell is at least a/(1+K*a); unseen rows are
// a/(K*a) = 1/K. Without smoothing the seen rows are one-hot at j.
func TestDawidSkeneSmoothingOneVote(t *testing.T) {
	const k = 3
	// Four labellers agree on twelve items, four per class; labeller 4
	// votes once, class 2 on item 0 (class 0 by the others).
	v := &Votes{NumItems: 12, NumLabellers: 5, NumClasses: k}
	for item := range 12 {
		for l := range 4 {
			v.Item = append(v.Item, int32(item))
			v.Labeller = append(v.Labeller, int32(l))
			v.Label = append(v.Label, int32(item%k))
		}
	}
	v.Item, v.Labeller, v.Label = append(v.Item, 0), append(v.Labeller, 4), append(v.Label, 2)

	res, err := DawidSkene(v, DawidSkeneOptions{})
	if err != nil {
		t.Fatal(err)
	}
	a := float64(DefaultSmoothing)
	floor := a / (1 + k*a)
	m := res.ConfusionOf(4)
	for tc := range k {
		row := m[tc*k : (tc+1)*k]
		for j, x := range row {
			if !(x > 0 && x >= floor-1e-12) {
				t.Errorf("smoothed: true %d vote %d = %g, want at least a/(1+K*a) = %g", tc, j, x, floor)
			}
		}
		if top := row[argmax(row)]; top >= 1-floor {
			t.Errorf("smoothed: row %d %v is one-hot", tc, row)
		}
	}

	raw, err := DawidSkene(v, DawidSkeneOptions{NoSmoothing: true})
	if err != nil {
		t.Fatal(err)
	}
	// Item 0 is class 0 beyond doubt, so row 0 has her whole vote.
	if got := raw.ConfusionOf(4)[0*k+0]; got != 0 {
		t.Errorf("no smoothing: true 0 vote 0 = %g, want 0", got)
	}
	if got := raw.ConfusionOf(4)[0*k+2]; math.Abs(got-1) > 1e-12 {
		t.Errorf("no smoothing: true 0 vote 2 = %g, want 1", got)
	}
}

// MaxIterations stops EM short, and the result says so.
func TestDawidSkeneIterationCap(t *testing.T) {
	v := anaesthesiaVotes(t)
	full, err := DawidSkene(v, DawidSkeneOptions{NoSmoothing: true, Tolerance: 1e-15, MaxIterations: 10000})
	if err != nil {
		t.Fatal(err)
	}
	const limit = 3
	if !full.Converged || full.Iterations <= limit {
		t.Fatalf("uncapped fit: converged %v after %d iterations; the cap would not bite", full.Converged, full.Iterations)
	}
	capped, err := DawidSkene(v, DawidSkeneOptions{NoSmoothing: true, Tolerance: 1e-15, MaxIterations: limit})
	if err != nil {
		t.Fatal(err)
	}
	if capped.Converged || capped.Iterations != limit {
		t.Errorf("capped fit: converged %v after %d iterations, want false after %d", capped.Converged, capped.Iterations, limit)
	}
	if capped.LogLikelihood >= full.LogLikelihood {
		t.Errorf("capped log-likelihood %v not below the converged %v", capped.LogLikelihood, full.LogLikelihood)
	}
}
