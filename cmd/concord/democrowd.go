package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"sync"
	"sync/atomic"
	"time"

	"github.com/concord-labs/concord/agreement"
	"github.com/concord-labs/concord/store"
)

// demoCrowdSpec is the demo's crowd: mostly careful and average labellers,
// one sloppy one, one random clicker and one who leans towards one label.
const demoCrowdSpec = "careful:3,average:4,sloppy:1,random:1,biased:1"

// demoPrior is how often each leaf passes the demo's camera (relative
// weights). The figures are invented for the demo, not measured at a plant.
var demoPrior = map[string]float64{
	"pet-bottle": 14, "hdpe-container": 7, "plastic-film": 10, "polystyrene": 3,
	"aluminium-can": 8, "steel-can": 5, "aerosol-can": 2,
	"cardboard": 12, "newspaper": 8, "office-paper": 6, "paper-cup": 4,
	"clear-glass": 6, "green-glass": 4, "brown-glass": 3, "residual-waste": 8,
}

// demoSeconds is the median time a kind of labeller takes per vote
// (invented: careful labellers zoom in, the random clicker does not look).
var demoSeconds = map[string]float64{"careful": 9, "average": 5.5, "sloppy": 3, "random": 1.4, "biased": 5}

// demoDupShare is the share of frames that re-shoot an earlier frame.
const demoDupShare = 0.08

// demoCrowd ties the drawing to the simulated crowd: frame i shows the
// leaf the crowd holds as item i's truth, so every simulated vote is about
// what the image really shows.
type demoCrowd struct {
	crowd  *agreement.Crowd
	leaves []string // crowd class -> leaf key
	plan   demoPlan
	logins []string // crowd labeller -> login
	seed   uint64
}

// newDemoCrowd draws the crowd and the frame plan from seed. Frame i's
// scene and truth do not depend on frames, so a smaller demo is a prefix of
// a larger one.
func newDemoCrowd(leaves []string, frames int, seed uint64, spec string) (*demoCrowd, error) {
	groups, err := agreement.ParseCrowdSpec(spec)
	if err != nil {
		return nil, fmt.Errorf("crowd spec %q: %w", spec, err)
	}
	prior := make([]float64, len(leaves))
	sum := 0.0
	for i, k := range leaves {
		prior[i] = demoPrior[k]
		if prior[i] == 0 {
			prior[i] = 3 // a leaf someone added to the taxonomy copy
		}
		sum += prior[i]
	}
	for i := range prior {
		prior[i] /= sum
	}
	c, err := agreement.NewCrowd(agreement.CrowdOptions{Items: frames, Classes: len(leaves), Groups: groups, Seed: seed, Prior: prior})
	if err != nil {
		return nil, err
	}
	d := &demoCrowd{crowd: c, leaves: leaves, seed: seed,
		plan: demoPlan{seed: seed, labels: make([]string, frames), dupOf: make([]int, frames)}}
	for i := range frames {
		d.plan.dupOf[i] = -1
		if i >= 12 && hashUnit(seed, uint64(i), 1) < demoDupShare {
			j := int(hashUnit(seed, uint64(i), 2) * float64(i))
			for d.plan.dupOf[j] >= 0 {
				j = d.plan.dupOf[j]
			}
			d.plan.dupOf[i] = j
			// A re-shot frame shows the same object, so it has the same
			// truth; the crowd reads Truth on every vote.
			c.Truth[i] = c.Truth[j]
		}
		d.plan.labels[i] = leaves[c.Truth[i]]
	}
	seen := map[string]int{}
	for _, l := range c.Labellers {
		seen[l.Kind]++
		d.logins = append(d.logins, fmt.Sprintf("%s%d", l.Kind, seen[l.Kind]))
	}
	return d, nil
}

// isGold says whether frame i is one of the demo's gold items: about one
// original frame in twenty, whose truth the lead "knows" from the drawing.
func (d *demoCrowd) isGold(i int) bool {
	return d.plan.dupOf[i] < 0 && hashUnit(d.seed, uint64(i), 3) < 0.05
}

// demoLabeller is one simulated labeller with their account.
type demoLabeller struct {
	index  int // in the crowd
	userID int64
	login  string
	kind   string
}

// crowdRun is what the simulated crowd needs from the demo's project.
type crowdRun struct {
	store   *store.Store
	project store.Project
	crowd   *demoCrowd
	people  []demoLabeller
	frameOf map[int64]int    // item id -> frame
	labelOf map[string]int64 // leaf key -> label id
	// decide is the vote path's consensus update, as for a vote over HTTP;
	// the refit between waves then refines every item with a new fit.
	decide store.Decider
	refit  func(ctx context.Context) error
	out    io.Writer
}

// run lets the crowd vote until no item needs votes. It works in waves,
// as labellers with a prefetch queue do: every active labeller claims a
// handful of items at once (concurrently, through the store's claim, so
// labellers compete for the same slots), then votes on them, then the
// engine refits. Claims held while the others claim keep every item within
// the votes it still needs. Faster labellers claim more per wave. It
// returns the number of votes cast.
func (r *crowdRun) run(ctx context.Context) (int, error) {
	start := time.Now()
	rngs := make([]*rand.Rand, len(r.people))
	for i, p := range r.people {
		rngs[i] = rand.New(rand.NewPCG(r.crowd.seed, uint64(p.index)+1<<32))
	}
	if err := r.refit(ctx); err != nil {
		return 0, err
	}
	total := 0
	for wave := 1; ; wave++ {
		active, err := r.activePeople(ctx)
		if err != nil {
			return total, err
		}
		claims := make([][]store.Claim, len(r.people))
		if err := r.each(ctx, active, func(ctx context.Context, i int) error {
			c, err := r.claimBatch(ctx, r.people[i], rngs[i])
			claims[i] = c
			return err
		}); err != nil {
			return total, err
		}
		var cast atomic.Int64
		if err := r.each(ctx, active, func(ctx context.Context, i int) error {
			for _, c := range claims[i] {
				if err := r.vote(ctx, r.people[i], rngs[i], c.Item.ID); err != nil {
					return err
				}
				cast.Add(1)
			}
			return nil
		}); err != nil {
			return total, err
		}
		total += int(cast.Load())
		if err := r.refit(ctx); err != nil {
			return total, err
		}
		counts, err := r.store.ProjectStatusCounts(ctx, r.project.ID)
		if err != nil {
			return total, err
		}
		open := counts.ByStatus["unstarted"] + counts.ByStatus["needs_votes"]
		fmt.Fprintf(r.out, "  wave %d: %d votes from %d labellers, %d votes in all, %d items still need votes, %d for review (%.1fs)\n",
			wave, cast.Load(), len(active), total, open, counts.ByStatus["review"], time.Since(start).Seconds())
		if open == 0 {
			return total, nil
		}
		if cast.Load() == 0 {
			// Nobody can vote on what is left (every active labeller
			// voted on it already): a lead would invite more people.
			fmt.Fprintf(r.out, "  no active labeller can vote on the %d items left; stopping\n", open)
			return total, nil
		}
	}
}

// activePeople are the labellers still active in the project: the engine
// may pause one whose gold accuracy is clearly too low.
func (r *crowdRun) activePeople(ctx context.Context) ([]int, error) {
	members, err := r.store.Members(ctx, r.project.ID)
	if err != nil {
		return nil, err
	}
	status := map[int64]string{}
	for _, m := range members {
		status[m.User.ID] = m.Status
	}
	var out []int
	for i, p := range r.people {
		if status[p.userID] == store.StatusActive {
			out = append(out, i)
		}
	}
	return out, nil
}

// each runs fn for every index in idx, one goroutine per labeller, and
// returns the first error.
func (r *crowdRun) each(ctx context.Context, idx []int, fn func(ctx context.Context, i int) error) error {
	ctx, cancel := context.WithCancelCause(ctx)
	defer cancel(nil)
	var wg sync.WaitGroup
	for _, i := range idx {
		wg.Go(func() {
			if err := fn(ctx, i); err != nil {
				cancel(err)
			}
		})
	}
	wg.Wait()
	if err := context.Cause(ctx); err != nil && !errors.Is(err, context.Canceled) {
		return err
	}
	return ctx.Err()
}

// claimBatch claims a labeller's share of a wave: more for fast labellers,
// as in a real hour of work. Each claim asks for a gold item at the
// project's gold rate, as the labelling screen does.
func (r *crowdRun) claimBatch(ctx context.Context, p demoLabeller, rng *rand.Rand) ([]store.Claim, error) {
	want := max(4, int(math.Round(100/demoSeconds[p.kind])))
	var held []int64
	var out []store.Claim
	for range want {
		c, err := r.store.ClaimNext(ctx, store.ClaimRequest{
			ProjectID:  r.project.ID,
			LabellerID: p.userID,
			Exclude:    held,
			Gold:       rng.Float64() < r.project.Policy.GoldRate,
			GoldSeed:   rng.Int64N(1 << 40),
			Lifetime:   time.Duration(r.project.Policy.ClaimSeconds) * time.Second,
		})
		if errors.Is(err, store.ErrNotFound) {
			break
		}
		if err != nil {
			return out, err
		}
		held = append(held, c.Item.ID)
		out = append(out, c)
	}
	return out, nil
}

// vote casts the crowd's vote of labeller p on an item through the store's
// vote path, with a seconds-per-vote drawn around the kind's median.
func (r *crowdRun) vote(ctx context.Context, p demoLabeller, rng *rand.Rand, itemID int64) error {
	frame, ok := r.frameOf[itemID]
	if !ok {
		return fmt.Errorf("demo: item %d is not one of the demo's frames", itemID)
	}
	key := r.crowd.leaves[r.crowd.crowd.Vote(p.index, frame)]
	label, ok := r.labelOf[key]
	if !ok {
		return fmt.Errorf("demo: label %q is not in the project's taxonomy", key)
	}
	// Log-normal times: most votes near the median, a few long looks.
	secs := demoSeconds[p.kind] * math.Exp(0.35*rng.NormFloat64())
	_, err := r.store.RecordVote(ctx, store.NewVote{
		ID:         demoVoteID(r.project.ID, p.userID, itemID),
		ProjectID:  r.project.ID,
		ItemID:     itemID,
		LabellerID: p.userID,
		LabelID:    &label,
		Seconds:    math.Round(secs*10) / 10,
	}, r.decide)
	return err
}

// demoVoteID is the vote's client-made UUID, derived from who voted on what
// so that a vote re-sent after an interrupted run is stored once. It is
// laid out as a version-8 (custom) UUID, RFC 9562 section 5.8.
func demoVoteID(project, labeller, item int64) string {
	hi := hashBits(uint64(project), uint64(labeller), uint64(item))
	lo := hashBits(hi, uint64(item), uint64(labeller))
	hi = hi&^(0xf<<12) | 0x8<<12 // version 8
	lo = lo&^(0x3<<62) | 0x2<<62 // RFC 9562 variant
	return fmt.Sprintf("%08x-%04x-%04x-%04x-%012x", hi>>32, hi>>16&0xffff, hi&0xffff, lo>>48, lo&0xffffffffffff)
}
