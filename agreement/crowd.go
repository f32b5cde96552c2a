package agreement

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
)

// Crowd is a simulated crowd with known truth, for comparing vote policies
// before paying for them and for filling demo projects. Every labeller has a
// fixed confusion matrix and every item a true class drawn from the class
// priors. Votes are made on demand and depend only on the seed, the labeller
// and the item, so a policy that asks for a fourth vote gets the same first
// three votes as one that stops at three: policies are compared on the same
// draws, and their differences are the policies', not the dice's.
//
// The labeller kinds and their numbers (see CrowdKinds) are invented for
// simulation; they are plausible, not measured on any real crowd.
type Crowd struct {
	NumItems   int
	NumClasses int
	// Truth is each item's true class.
	Truth []int32
	// Prior is the share of each class among items in expectation.
	Prior []float64
	// Labellers describes each simulated labeller, in id order.
	Labellers []CrowdLabeller

	seed      uint64
	confusion []float64 // labellers x K x K, rows: true class
	cum       []float64 // the same rows as running sums, for sampling
}

// CrowdLabeller is one simulated labeller.
type CrowdLabeller struct {
	Kind string
	// Accuracy is the chance that a vote on a random item is right: the
	// diagonal of the confusion matrix weighted by the class priors.
	Accuracy float64
	// Favourite is the label a biased labeller leans towards, else -1.
	Favourite int
}

// CrowdGroup is one entry of a crowd spec: Count labellers of Kind.
type CrowdGroup struct {
	Kind  string
	Count int
}

// CrowdKind is the behaviour of one kind of simulated labeller.
type CrowdKind struct {
	Name string
	// Accuracy is the mean chance of a right vote on any class; each
	// labeller of the kind gets Accuracy +/- up to Jitter, so two careful
	// labellers are not identical.
	Accuracy float64
	Jitter   float64
	// Random labellers vote uniformly, ignoring the item.
	Random bool
	// Bias is the share of votes a biased labeller gives to its favourite
	// label whatever the item; the rest follow Accuracy.
	Bias float64
}

// CrowdKinds are the labeller kinds a crowd spec may name. The figures are
// invented: careful labellers who zoom in and check, average ones, sloppy
// ones who hurry, a random clicker who ignores the image, and one who
// reaches for one label (say "residual waste") whenever unsure.
var CrowdKinds = []CrowdKind{
	{Name: "careful", Accuracy: 0.95, Jitter: 0.02},
	{Name: "average", Accuracy: 0.80, Jitter: 0.05},
	{Name: "sloppy", Accuracy: 0.65, Jitter: 0.05},
	{Name: "random", Random: true},
	{Name: "biased", Accuracy: 0.80, Jitter: 0.05, Bias: 0.30},
}

// DefaultCrowdSpec is a mix of mostly average labellers, a few careful and
// sloppy ones, one random clicker and one biased labeller. It is invented
// for simulation, not measured.
const DefaultCrowdSpec = "careful:4,average:10,sloppy:5,random:1,biased:1"

// confusableShare is the part of a labeller's errors that go to the class's
// look-alike (PET bottle for another clear plastic); the rest spread evenly.
// Real errors cluster like this, and clustered errors are what make two
// agreeing votes less convincing than independent noise would.
const confusableShare = 0.5

// ParseCrowdSpec reads "kind:count,kind:count,...", for example
// "careful:5,average:10,sloppy:4,random:1,biased:1". Errors name the
// field by position and text.
func ParseCrowdSpec(spec string) ([]CrowdGroup, error) {
	if strings.TrimSpace(spec) == "" {
		return nil, fmt.Errorf("crowd spec is empty: want kind:count,... with kinds %s", kindNames())
	}
	var groups []CrowdGroup
	seen := map[string]int{}
	for i, field := range strings.Split(spec, ",") {
		field = strings.TrimSpace(field)
		name, count, ok := strings.Cut(field, ":")
		if !ok {
			return nil, fmt.Errorf("crowd spec field %d %q: want kind:count", i+1, field)
		}
		name = strings.TrimSpace(name)
		if crowdKind(name) == nil {
			return nil, fmt.Errorf("crowd spec field %d %q: unknown kind %q (want one of %s)", i+1, field, name, kindNames())
		}
		if j, dup := seen[name]; dup {
			return nil, fmt.Errorf("crowd spec field %d %q: kind %q already given in field %d", i+1, field, name, j)
		}
		seen[name] = i + 1
		n, err := strconv.Atoi(strings.TrimSpace(count))
		if err != nil || n < 0 {
			return nil, fmt.Errorf("crowd spec field %d %q: count %q is not a whole number >= 0", i+1, field, count)
		}
		groups = append(groups, CrowdGroup{Kind: name, Count: n})
	}
	return groups, nil
}

func crowdKind(name string) *CrowdKind {
	for i := range CrowdKinds {
		if CrowdKinds[i].Name == name {
			return &CrowdKinds[i]
		}
	}
	return nil
}

func kindNames() string {
	names := make([]string, len(CrowdKinds))
	for i, k := range CrowdKinds {
		names[i] = k.Name
	}
	return strings.Join(names, ", ")
}

// CrowdOptions says what crowd NewCrowd builds.
type CrowdOptions struct {
	Items   int
	Classes int
	Groups  []CrowdGroup
	Seed    uint64
	// Prior is the class mix; nil means DefaultPrior(Classes).
	Prior []float64
}

// DefaultPrior is a long-tailed class mix, p_k proportional to
// 1/(k+1)^0.8: on a sorting line a few materials dominate and some are rare.
// The exponent is invented for simulation.
func DefaultPrior(k int) []float64 {
	p := make([]float64, k)
	sum := 0.0
	for i := range p {
		p[i] = math.Pow(float64(i+1), -0.8)
		sum += p[i]
	}
	for i := range p {
		p[i] /= sum
	}
	return p
}

// NewCrowd draws the labellers' confusion matrices and the items' true
// classes from opt.Seed.
func NewCrowd(opt CrowdOptions) (*Crowd, error) {
	k := opt.Classes
	switch {
	case opt.Items < 1:
		return nil, fmt.Errorf("crowd: items %d, want at least 1", opt.Items)
	case k < 2:
		return nil, fmt.Errorf("crowd: classes %d, want at least 2", k)
	}
	prior := opt.Prior
	if prior == nil {
		prior = DefaultPrior(k)
	}
	if len(prior) != k {
		return nil, fmt.Errorf("crowd: prior has %d classes, want %d", len(prior), k)
	}
	rng := rand.New(rand.NewPCG(opt.Seed, 0x636f6e636f7264)) // "concord"
	c := &Crowd{NumItems: opt.Items, NumClasses: k, Prior: prior, seed: opt.Seed}

	// Look-alike pairs are the crowd's, not the labeller's: everyone
	// mistakes the same two plastics for each other.
	order := rng.Perm(k)
	lookAlike := make([]int, k)
	for i, cl := range order {
		lookAlike[cl] = order[(i+1)%k]
	}
	for _, g := range opt.Groups {
		kind := crowdKind(g.Kind)
		if kind == nil {
			return nil, fmt.Errorf("crowd: unknown labeller kind %q (want one of %s)", g.Kind, kindNames())
		}
		for range g.Count {
			lab, m := drawConfusion(kind, k, lookAlike, rng)
			for t := range k {
				lab.Accuracy += prior[t] * m[t*k+t]
			}
			c.Labellers = append(c.Labellers, lab)
			c.confusion = append(c.confusion, m...)
		}
	}
	if len(c.Labellers) == 0 {
		return nil, fmt.Errorf("crowd: no labellers")
	}
	c.cum = make([]float64, len(c.confusion))
	for r := 0; r < len(c.confusion); r += k {
		s := 0.0
		for j := range k {
			s += c.confusion[r+j]
			c.cum[r+j] = s
		}
		c.cum[r+k-1] = math.Inf(1) // rounding must never leave a draw unmatched
	}

	cumPrior := make([]float64, k)
	s := 0.0
	for i, p := range prior {
		if !(p >= 0) {
			return nil, fmt.Errorf("crowd: prior of class %d is %g, want >= 0", i, p)
		}
		s += p
		cumPrior[i] = s
	}
	if math.Abs(s-1) > 1e-9 {
		return nil, fmt.Errorf("crowd: prior sums to %g, want 1", s)
	}
	c.Truth = make([]int32, opt.Items)
	for i := range c.Truth {
		c.Truth[i] = int32(sample(cumPrior, rng.Float64()*s))
	}
	return c, nil
}

// drawConfusion makes one labeller's K x K matrix.
func drawConfusion(kind *CrowdKind, k int, lookAlike []int, rng *rand.Rand) (CrowdLabeller, []float64) {
	m := make([]float64, k*k)
	lab := CrowdLabeller{Kind: kind.Name, Favourite: -1}
	if kind.Random {
		for i := range m {
			m[i] = 1 / float64(k)
		}
		return lab, m
	}
	acc := kind.Accuracy + kind.Jitter*(2*rng.Float64()-1)
	acc = min(max(acc, 1/float64(k)), 1)
	errs := 1 - acc
	for t := range k {
		row := m[t*k : (t+1)*k]
		row[t] = acc
		if k == 2 {
			row[lookAlike[t]] += errs
			continue
		}
		row[lookAlike[t]] += errs * confusableShare
		for j := range k {
			if j != t && j != lookAlike[t] {
				row[j] += errs * (1 - confusableShare) / float64(k-2)
			}
		}
	}
	if kind.Bias > 0 {
		lab.Favourite = rng.IntN(k)
		for t := range k {
			row := m[t*k : (t+1)*k]
			for j := range row {
				row[j] *= 1 - kind.Bias
			}
			row[lab.Favourite] += kind.Bias
		}
	}
	return lab, m
}

// sample returns the first index whose running sum exceeds u.
func sample(cum []float64, u float64) int {
	for i, c := range cum {
		if u < c {
			return i
		}
	}
	return len(cum) - 1
}

// NumLabellers is the size of the crowd.
func (c *Crowd) NumLabellers() int { return len(c.Labellers) }

// ConfusionOf returns labeller l's true K x K matrix (rows: true class). The
// slice aliases the crowd; do not change it.
func (c *Crowd) ConfusionOf(l int) []float64 {
	kk := c.NumClasses * c.NumClasses
	return c.confusion[l*kk : (l+1)*kk : (l+1)*kk]
}

// Vote is the label labeller gives item. It depends only on the seed, the
// labeller and the item, so asking twice gives the same answer.
func (c *Crowd) Vote(labeller, item int) int {
	k := c.NumClasses
	row := (labeller*k + int(c.Truth[item])) * k
	u := unitFloat(mix3(c.seed, 1, uint64(labeller), uint64(item)))
	return sample(c.cum[row:row+k], u)
}

// Panel returns the first n labellers who vote on item, in the order they
// vote: a seeded shuffle of the whole crowd, so nobody votes twice on one
// item and the first n are the same whatever n is asked for. n is capped at
// the size of the crowd.
func (c *Crowd) Panel(item, n int) []int {
	l := len(c.Labellers)
	n = min(n, l)
	perm := make([]int, l)
	for i := range perm {
		perm[i] = i
	}
	// A partial Fisher-Yates shuffle draws only the places it returns.
	for i := range n {
		u := unitFloat(mix3(c.seed, 2, uint64(item), uint64(i)))
		j := i + int(u*float64(l-i))
		perm[i], perm[j] = perm[j], perm[i]
	}
	return perm[:n]
}

// VotesFor builds the votes when item i has received its first counts[i]
// votes (see Panel), in item order.
func (c *Crowd) VotesFor(counts []int) (*Votes, error) {
	if len(counts) != c.NumItems {
		return nil, fmt.Errorf("crowd: %d vote counts for %d items", len(counts), c.NumItems)
	}
	total := 0
	for i, n := range counts {
		if n < 0 || n > len(c.Labellers) {
			return nil, fmt.Errorf("crowd: item %d: %d votes, want 0 to %d (one per labeller)", i, n, len(c.Labellers))
		}
		total += n
	}
	v := &Votes{NumItems: c.NumItems, NumLabellers: len(c.Labellers), NumClasses: c.NumClasses,
		Item: make([]int32, 0, total), Labeller: make([]int32, 0, total), Label: make([]int32, 0, total)}
	for i, n := range counts {
		for _, l := range c.Panel(i, n) {
			v.Item = append(v.Item, int32(i))
			v.Labeller = append(v.Labeller, int32(l))
			v.Label = append(v.Label, int32(c.Vote(l, i)))
		}
	}
	return v, nil
}

// Coin is a seeded uniform draw in [0,n) tied to the crowd's seed and two
// keys, for choices a simulation must make reproducibly (breaking a tie).
func (c *Crowd) Coin(a, b uint64, n int) int {
	return int(unitFloat(mix3(c.seed, 3, a, b)) * float64(n))
}

// mix3 hashes a seed, a stream tag and two keys with the SplitMix64
// finaliser (Steele, Lea & Flood 2014), so every (labeller, item) pair has
// its own independent-looking draw without keeping any state.
func mix3(seed, stream, a, b uint64) uint64 {
	h := seed ^ stream*0x9e3779b97f4a7c15
	h = splitmix(h + a)
	h = splitmix(h + b)
	return h
}

func splitmix(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// unitFloat maps a hash to [0,1) using its top 53 bits.
func unitFloat(h uint64) float64 { return float64(h>>11) / (1 << 53) }
