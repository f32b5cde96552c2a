package agreement

import (
	"math"
	"slices"
	"strings"
	"testing"
)

func TestParseCrowdSpec(t *testing.T) {
	got, err := ParseCrowdSpec("careful:5, average:10,sloppy:4,random:1,biased:0")
	if err != nil {
		t.Fatal(err)
	}
	want := []CrowdGroup{{"careful", 5}, {"average", 10}, {"sloppy", 4}, {"random", 1}, {"biased", 0}}
	if !slices.Equal(got, want) {
		t.Errorf("got %v, want %v", got, want)
	}

	bad := []struct {
		spec string
		want []string // every piece must be in the error
	}{
		{"", []string{"empty"}},
		{"careful:5,avrage:10", []string{"field 2", `"avrage:10"`, `unknown kind "avrage"`}},
		{"careful", []string{"field 1", "want kind:count"}},
		{"careful:5,sloppy:x", []string{"field 2", `count "x"`}},
		{"careful:-1", []string{"field 1", `count "-1"`}},
		{"careful:2,average:3,careful:1", []string{"field 3", `"careful" already given in field 1`}},
	}
	for _, tc := range bad {
		_, err := ParseCrowdSpec(tc.spec)
		if err == nil {
			t.Errorf("%q: no error", tc.spec)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%q: error %q does not mention %q", tc.spec, err, w)
			}
		}
	}
}

func defaultCrowd(t *testing.T, items int, seed uint64) *Crowd {
	t.Helper()
	groups, err := ParseCrowdSpec(DefaultCrowdSpec)
	if err != nil {
		t.Fatal(err)
	}
	c, err := NewCrowd(CrowdOptions{Items: items, Classes: 10, Groups: groups, Seed: seed})
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// within reports whether k successes in n trials are within 4.5 binomial
// standard errors of p: common practice for a check that a seeded draw
// follows its distribution without being flaky across seeds.
func within(k, n int, p float64) bool {
	se := math.Sqrt(p * (1 - p) / float64(n))
	return math.Abs(float64(k)/float64(n)-p) <= 4.5*se+1e-12
}

func TestCrowdMatchesItsModel(t *testing.T) {
	const items = 40000
	c := defaultCrowd(t, items, 7)
	if c.NumLabellers() != 21 {
		t.Fatalf("%d labellers, want 21", c.NumLabellers())
	}
	k := c.NumClasses

	// Each confusion row is a distribution.
	for l := range c.NumLabellers() {
		m := c.ConfusionOf(l)
		for tr := range k {
			s := 0.0
			for _, x := range m[tr*k : (tr+1)*k] {
				if x < 0 {
					t.Fatalf("labeller %d: negative cell", l)
				}
				s += x
			}
			if math.Abs(s-1) > 1e-12 {
				t.Fatalf("labeller %d row %d sums to %g", l, tr, s)
			}
		}
	}

	// True classes follow the prior.
	counts := make([]int, k)
	for _, tr := range c.Truth {
		counts[tr]++
	}
	for cl, n := range counts {
		if !within(n, items, c.Prior[cl]) {
			t.Errorf("class %d: %d of %d items, prior %.3f", cl, n, items, c.Prior[cl])
		}
	}

	// Each labeller's votes follow its confusion matrix: the hit rate
	// matches Accuracy, and kinds are ordered as their names promise.
	byKind := map[string][]float64{}
	for l, lab := range c.Labellers {
		right := 0
		for i := range items {
			if c.Vote(l, i) == int(c.Truth[i]) {
				right++
			}
		}
		if !within(right, items, lab.Accuracy) {
			t.Errorf("labeller %d (%s): %d/%d right, model says %.3f", l, lab.Kind, right, items, lab.Accuracy)
		}
		byKind[lab.Kind] = append(byKind[lab.Kind], lab.Accuracy)
	}
	if got := byKind["random"][0]; math.Abs(got-0.1) > 1e-12 {
		t.Errorf("random clicker accuracy %g, want 1/K = 0.1", got)
	}
	if slices.Min(byKind["careful"]) <= slices.Max(byKind["average"]) || slices.Min(byKind["average"]) <= slices.Max(byKind["sloppy"]) {
		t.Errorf("kinds overlap: %v", byKind)
	}

	// The biased labeller gives its favourite far more than its share.
	for l, lab := range c.Labellers {
		if lab.Kind != "biased" {
			continue
		}
		fav := 0
		for i := range items {
			if c.Vote(l, i) == lab.Favourite {
				fav++
			}
		}
		if share := float64(fav) / items; share < CrowdKinds[4].Bias {
			t.Errorf("biased labeller gave its favourite %.3f of votes, want >= %.2f", share, CrowdKinds[4].Bias)
		}
	}
}

func TestCrowdIsSeeded(t *testing.T) {
	a, b, other := defaultCrowd(t, 500, 1), defaultCrowd(t, 500, 1), defaultCrowd(t, 500, 2)
	if !slices.Equal(a.Truth, b.Truth) || slices.Equal(a.Truth, other.Truth) {
		t.Fatal("truth does not follow the seed")
	}
	counts := make([]int, 500)
	for i := range counts {
		counts[i] = 1 + i%7
	}
	va, err := a.VotesFor(counts)
	if err != nil {
		t.Fatal(err)
	}
	vb, _ := b.VotesFor(counts)
	vo, _ := other.VotesFor(counts)
	if !slices.Equal(va.Label, vb.Label) || !slices.Equal(va.Labeller, vb.Labeller) {
		t.Error("same seed, different votes")
	}
	if slices.Equal(va.Labeller, vo.Labeller) {
		t.Error("different seeds, same panels")
	}
	if err := va.Validate(); err != nil {
		t.Fatal(err)
	}
	if va.Len() != 71*28+1+2+3 { // 1..7 repeating over 500 items: 71 cycles of 28 votes, then 1, 2, 3
		t.Errorf("%d votes", va.Len())
	}
}

func TestCrowdPanel(t *testing.T) {
	c := defaultCrowd(t, 3000, 3)
	l := c.NumLabellers()
	first := make([]int, l)
	for item := range c.NumItems {
		full := c.Panel(item, l+5)
		if len(full) != l {
			t.Fatalf("panel of %d, want the whole crowd of %d", len(full), l)
		}
		sorted := slices.Sorted(slices.Values(full))
		for i, x := range sorted {
			if x != i {
				t.Fatalf("item %d: panel %v repeats or skips a labeller", item, full)
			}
		}
		if p3 := c.Panel(item, 3); !slices.Equal(p3, full[:3]) {
			t.Fatalf("item %d: first 3 %v differ from prefix of %v", item, p3, full)
		}
		first[full[0]]++
	}
	// Every labeller is equally likely to vote first.
	for lab, n := range first {
		if !within(n, c.NumItems, 1/float64(l)) {
			t.Errorf("labeller %d first on %d of %d items", lab, n, c.NumItems)
		}
	}
}

func TestNewCrowdErrors(t *testing.T) {
	g := []CrowdGroup{{"average", 3}}
	for _, tc := range []struct {
		opt  CrowdOptions
		want string
	}{
		{CrowdOptions{Items: 0, Classes: 3, Groups: g}, "items 0"},
		{CrowdOptions{Items: 5, Classes: 1, Groups: g}, "classes 1"},
		{CrowdOptions{Items: 5, Classes: 3}, "no labellers"},
		{CrowdOptions{Items: 5, Classes: 3, Groups: []CrowdGroup{{"lazy", 1}}}, `"lazy"`},
		{CrowdOptions{Items: 5, Classes: 3, Groups: g, Prior: []float64{0.5, 0.5}}, "prior has 2"},
		{CrowdOptions{Items: 5, Classes: 2, Groups: g, Prior: []float64{0.5, 0.6}}, "sums to"},
	} {
		if _, err := NewCrowd(tc.opt); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%+v: error %v, want %q", tc.opt, err, tc.want)
		}
	}
	c, _ := NewCrowd(CrowdOptions{Items: 5, Classes: 3, Groups: g})
	if _, err := c.VotesFor([]int{1, 1, 1, 1, 4}); err == nil || !strings.Contains(err.Error(), "item 4") {
		t.Errorf("too many votes: %v", err)
	}
}
