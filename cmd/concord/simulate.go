package main

import (
	"cmp"
	"context"
	"encoding/json"
	"fmt"
	"html"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/concord-labs/concord/agreement"
)

// fixedVotes are the fixed-size panels every simulation compares: three,
// five and seven votes per item are the sizes leads commonly buy.
var fixedVotes = []int{3, 5, 7}

// z95 is the standard normal quantile for a two-sided 95% interval.
const z95 = 1.959963984540054

// baselinePolicy is the policy the adaptive ones are measured against.
const baselinePolicy = "majority-5"

// tieRule says how fixed-panel majority vote scores a tie. A seeded coin
// among the tied labels is what a lead without a review queue would do, and
// it gives majority vote its fair share of right answers, so the comparison
// with the adaptive policy is not tilted in the adaptive policy's favour.
const tieRule = "majority-vote ties are broken by a seeded coin among the tied labels"

type simOptions struct {
	items, classes     int
	crowd              string
	seed               uint64
	rate               float64
	currency           string
	svg                string
	json               bool
	minVotes, maxVotes int
	targets            []float64
	batch              int
	smoothing          float64
}

// policyResult is one row of the comparison.
type policyResult struct {
	Name         string  `json:"name"`
	Method       string  `json:"method"` // "majority" or "dawid-skene"
	Adaptive     bool    `json:"adaptive"`
	Target       float64 `json:"target,omitempty"`
	Items        int     `json:"items"`
	Votes        int     `json:"votes"`
	VotesPerItem float64 `json:"votes_per_item"`
	Correct      int     `json:"correct"`
	Accuracy     float64 `json:"accuracy"`
	AccuracyLow  float64 `json:"accuracy_low"`  // 95% Wilson interval
	AccuracyHigh float64 `json:"accuracy_high"` // 95% Wilson interval
	Cost         float64 `json:"cost"`
	Ties         int     `json:"ties,omitempty"`   // majority: items decided by the coin
	Review       int     `json:"review,omitempty"` // adaptive: items left below target at max votes
	Rounds       int     `json:"rounds,omitempty"` // adaptive: Dawid-Skene refits
	// MeanConfidence is the mean posterior of the chosen labels
	// (Dawid-Skene only): next to Accuracy it shows whether the model is
	// as sure as it has a right to be.
	MeanConfidence float64 `json:"mean_confidence,omitempty"`
}

type crowdSummary struct {
	Kind     string  `json:"kind"`
	Count    int     `json:"count"`
	Accuracy float64 `json:"accuracy"` // mean over the kind's labellers
}

// simCheck answers the question leads ask: which adaptive policy matches
// fixed five-vote majority, and for what share of its votes?
type simCheck struct {
	Baseline         string  `json:"baseline"`
	BaselineAccuracy float64 `json:"baseline_accuracy"`
	Policy           string  `json:"policy,omitempty"` // cheapest adaptive policy at least as accurate; empty if none
	Accuracy         float64 `json:"accuracy,omitempty"`
	VoteShare        float64 `json:"vote_share,omitempty"` // its votes / the baseline's
}

type simReport struct {
	Items     int            `json:"items"`
	Classes   int            `json:"classes"`
	Crowd     string         `json:"crowd"`
	Labellers []crowdSummary `json:"labellers"`
	Seed      uint64         `json:"seed"`
	Rate      float64        `json:"rate"`
	Currency  string         `json:"currency"`
	TieRule   string         `json:"tie_rule"`
	MinVotes  int            `json:"min_votes"`
	MaxVotes  int            `json:"max_votes"`
	Batch     int            `json:"batch"`
	Smoothing float64        `json:"smoothing"`
	Policies  []policyResult `json:"policies"`
	Check     simCheck       `json:"check"`
}

func runSimulate(ctx context.Context, e *env, args []string) error {
	opt, err := parseSimulateFlags(e, args)
	if err != nil {
		return err
	}
	rep, err := simulate(ctx, opt)
	if err != nil {
		return err
	}
	if opt.svg != "" {
		if err := os.WriteFile(opt.svg, []byte(accuracySVG(rep)), 0o644); err != nil {
			return fmt.Errorf("simulate: write chart: %w", err)
		}
	}
	if opt.json {
		enc := json.NewEncoder(e.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(rep)
	}
	printSimulation(e.stdout, rep)
	return nil
}

func parseSimulateFlags(e *env, args []string) (simOptions, error) {
	fs := newFlagSet(e, "simulate", "simulate [--items N] [--classes K] [--crowd SPEC] [--seed S] [--rate R] [--currency C] [--svg FILE] [--json]")
	var opt simOptions
	var targets string
	fs.IntVar(&opt.items, "items", 2000, "simulated items")
	fs.IntVar(&opt.classes, "classes", 10, "classes (labels) items fall into")
	fs.StringVar(&opt.crowd, "crowd", agreement.DefaultCrowdSpec, "crowd as kind:count,... with kinds careful, average, sloppy, random, biased (invented figures)")
	fs.Uint64Var(&opt.seed, "seed", 1, "seed for the crowd, the truth and every vote")
	fs.Float64Var(&opt.rate, "rate", 0.02, "price of one vote")
	fs.StringVar(&opt.currency, "currency", "EUR", "currency of --rate")
	fs.StringVar(&opt.svg, "svg", "", "write the accuracy-versus-votes chart to this SVG file")
	fs.BoolVar(&opt.json, "json", false, "print JSON instead of a table")
	fs.IntVar(&opt.minVotes, "min-votes", 2, "adaptive policy: votes every item gets before the first fit")
	fs.IntVar(&opt.maxVotes, "max-votes", 7, "adaptive policy: votes after which an unsure item goes to review")
	fs.StringVar(&targets, "targets", "0.90,0.95,0.97,0.98,0.99,0.995", "adaptive policy: confidence targets to compare, comma-separated")
	fs.IntVar(&opt.batch, "batch", 0, "adaptive policy: extra votes handed out between refits (0: a twentieth of the items)")
	fs.Float64Var(&opt.smoothing, "smoothing", agreement.DefaultSmoothing, "Dawid-Skene pseudo-count per confusion cell")
	if err := parseFlags(e, fs, args); err != nil {
		return opt, err
	}
	if fs.NArg() > 0 {
		return opt, usagef("simulate: unexpected argument %q", fs.Arg(0))
	}
	for i, f := range strings.Split(targets, ",") {
		x, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil || !(x > 0 && x <= 1) {
			return opt, usagef("simulate: --targets entry %d %q: want a number in (0,1]", i+1, f)
		}
		opt.targets = append(opt.targets, x)
	}
	switch {
	case opt.items < 1:
		return opt, usagef("simulate: --items %d: want at least 1", opt.items)
	case opt.classes < 2:
		return opt, usagef("simulate: --classes %d: want at least 2", opt.classes)
	case opt.rate < 0 || math.IsNaN(opt.rate):
		return opt, usagef("simulate: --rate %g: want a price >= 0", opt.rate)
	case opt.minVotes < 1:
		return opt, usagef("simulate: --min-votes %d: want at least 1", opt.minVotes)
	case opt.maxVotes < opt.minVotes:
		return opt, usagef("simulate: --max-votes %d is below --min-votes %d", opt.maxVotes, opt.minVotes)
	case !(opt.smoothing > 0):
		return opt, usagef("simulate: --smoothing %g: want a pseudo-count > 0", opt.smoothing)
	case opt.batch < 0:
		return opt, usagef("simulate: --batch %d: want 0 or more", opt.batch)
	}
	if opt.batch == 0 {
		opt.batch = max(1, opt.items/20)
	}
	return opt, nil
}

func simulate(ctx context.Context, opt simOptions) (*simReport, error) {
	groups, err := agreement.ParseCrowdSpec(opt.crowd)
	if err != nil {
		return nil, usagef("simulate: --crowd: %v", err)
	}
	crowd, err := agreement.NewCrowd(agreement.CrowdOptions{Items: opt.items, Classes: opt.classes, Groups: groups, Seed: opt.seed})
	if err != nil {
		return nil, usagef("simulate: --crowd %q: %v", opt.crowd, err)
	}
	// Nobody votes twice on one item, so the largest panel needs that
	// many different labellers.
	if need := max(opt.maxVotes, fixedVotes[len(fixedVotes)-1]); crowd.NumLabellers() < need {
		return nil, usagef("simulate: --crowd %q has %d labellers; the largest panel needs %d different ones", opt.crowd, crowd.NumLabellers(), need)
	}
	rep := &simReport{Items: opt.items, Classes: opt.classes, Crowd: opt.crowd, Seed: opt.seed, Rate: opt.rate,
		Currency: opt.currency, TieRule: tieRule, MinVotes: opt.minVotes, MaxVotes: opt.maxVotes, Batch: opt.batch, Smoothing: opt.smoothing}
	rep.Labellers = summariseCrowd(crowd, groups)

	score := func(r policyResult, labels []int32) policyResult {
		r.Items = opt.items
		for i, l := range labels {
			if l == crowd.Truth[i] {
				r.Correct++
			}
		}
		r.VotesPerItem = float64(r.Votes) / float64(r.Items)
		r.Accuracy = float64(r.Correct) / float64(r.Items)
		r.AccuracyLow, r.AccuracyHigh = agreement.WilsonInterval(r.Correct, r.Items, z95)
		r.Cost = float64(r.Votes) * opt.rate
		return r
	}

	for _, k := range fixedVotes {
		v, err := crowd.VotesFor(filled(opt.items, k))
		if err != nil {
			return nil, fmt.Errorf("simulate: %d votes per item: %w", k, err)
		}
		mv, err := agreement.MajorityVote(v)
		if err != nil {
			return nil, fmt.Errorf("simulate: majority vote, %d votes per item: %w", k, err)
		}
		labels := make([]int32, opt.items)
		ties := 0
		for i := range labels {
			labels[i] = mv.Label[i]
			if tied := mv.TiedLabels(i); tied != nil {
				labels[i] = int32(tied[crowd.Coin(uint64(i), uint64(k), len(tied))])
				ties++
			}
		}
		rep.Policies = append(rep.Policies, score(policyResult{Name: fmt.Sprintf("majority-%d", k), Method: "majority", Votes: v.Len(), Ties: ties}, labels))

		ds, err := agreement.DawidSkene(v, agreement.DawidSkeneOptions{Smoothing: opt.smoothing})
		if err != nil {
			return nil, fmt.Errorf("simulate: Dawid-Skene, %d votes per item: %w", k, err)
		}
		rep.Policies = append(rep.Policies, score(policyResult{Name: fmt.Sprintf("dawid-skene-%d", k), Method: "dawid-skene", Votes: v.Len(),
			MeanConfidence: mean(ds.Confidence)}, ds.Label))
	}

	for _, target := range opt.targets {
		pol := agreement.VotePolicy{MinVotes: opt.minVotes, MaxVotes: opt.maxVotes, Target: target}
		r, labels, err := runAdaptive(ctx, crowd, pol, opt.batch, opt.smoothing)
		if err != nil {
			return nil, err
		}
		rep.Policies = append(rep.Policies, score(r, labels))
	}
	rep.Check = checkAgainstBaseline(rep.Policies)
	return rep, nil
}

// runAdaptive plays the adaptive policy: every item gets MinVotes, then
// Dawid-Skene is fitted, the policy decides which items need votes, the
// most useful batch of them (the policy's queue order) gets one more vote
// each, and the model is refitted, until no item needs votes.
func runAdaptive(ctx context.Context, crowd *agreement.Crowd, pol agreement.VotePolicy, batch int, smoothing float64) (policyResult, []int32, error) {
	r := policyResult{Name: fmt.Sprintf("adaptive-%g", pol.Target), Method: "dawid-skene", Adaptive: true, Target: pol.Target}
	counts := filled(crowd.NumItems, pol.MinVotes)
	for {
		if err := ctx.Err(); err != nil {
			return r, nil, err
		}
		v, err := crowd.VotesFor(counts)
		if err != nil {
			return r, nil, fmt.Errorf("simulate: %s: %w", r.Name, err)
		}
		ds, err := agreement.DawidSkene(v, agreement.DawidSkeneOptions{Smoothing: smoothing})
		if err != nil {
			return r, nil, fmt.Errorf("simulate: %s, round %d: %w", r.Name, r.Rounds+1, err)
		}
		r.Rounds++
		plans, err := pol.Plan(&ds.Consensus, agreement.AverageConfusion(ds))
		if err != nil {
			return r, nil, fmt.Errorf("simulate: %s: %w", r.Name, err)
		}
		queue := agreement.Queue(plans)
		if len(queue) == 0 {
			r.Votes = v.Len()
			r.MeanConfidence = mean(ds.Confidence)
			for _, pl := range plans {
				if pl.Status == agreement.StatusReview {
					r.Review++
				}
			}
			return r, ds.Label, nil
		}
		for _, pl := range queue[:min(batch, len(queue))] {
			counts[pl.Item]++
		}
	}
}

func mean(xs []float64) float64 {
	s := 0.0
	for _, x := range xs {
		s += x
	}
	return s / float64(max(len(xs), 1))
}

func filled(n, x int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = x
	}
	return s
}

func summariseCrowd(crowd *agreement.Crowd, groups []agreement.CrowdGroup) []crowdSummary {
	var out []crowdSummary
	l := 0
	for _, g := range groups {
		if g.Count == 0 {
			continue
		}
		s := crowdSummary{Kind: g.Kind, Count: g.Count}
		for range g.Count {
			s.Accuracy += crowd.Labellers[l].Accuracy / float64(g.Count)
			l++
		}
		out = append(out, s)
	}
	return out
}

// checkAgainstBaseline finds the adaptive policy with the fewest votes
// that is at least as accurate as the baseline.
func checkAgainstBaseline(ps []policyResult) simCheck {
	c := simCheck{Baseline: baselinePolicy}
	var base *policyResult
	for i := range ps {
		if ps[i].Name == baselinePolicy {
			base = &ps[i]
		}
	}
	if base == nil {
		return c
	}
	c.BaselineAccuracy = base.Accuracy
	for _, p := range ps {
		if !p.Adaptive || p.Correct < base.Correct {
			continue
		}
		share := float64(p.Votes) / float64(base.Votes)
		if c.Policy == "" || share < c.VoteShare {
			c.Policy, c.Accuracy, c.VoteShare = p.Name, p.Accuracy, share
		}
	}
	return c
}

func printSimulation(w io.Writer, rep *simReport) {
	fmt.Fprintf(w, "Simulated crowd (invented figures), seed %d: %d items, %d classes, crowd %s\n", rep.Seed, rep.Items, rep.Classes, rep.Crowd)
	for _, s := range rep.Labellers {
		fmt.Fprintf(w, "  %-8s x%-3d mean accuracy %5.1f%%\n", s.Kind, s.Count, 100*s.Accuracy)
	}
	fmt.Fprintf(w, "Adaptive: Dawid-Skene (smoothing %g) refitted after every %d extra votes; min %d, max %d votes per item.\n\n", rep.Smoothing, rep.Batch, rep.MinVotes, rep.MaxVotes)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "policy\tvotes/item\tvotes\taccuracy\t95%% interval\tmean confidence\tcost (%s)\tnote\t\n", rep.Currency)
	for _, p := range rep.Policies {
		note := ""
		switch {
		case p.Ties > 0:
			note = fmt.Sprintf("%d ties by coin", p.Ties)
		case p.Review > 0:
			note = fmt.Sprintf("%d to review", p.Review)
		}
		conf := "-"
		if p.Method == "dawid-skene" {
			conf = fmt.Sprintf("%.2f%%", 100*p.MeanConfidence)
		}
		fmt.Fprintf(tw, "%s\t%.2f\t%d\t%.2f%%\t%.2f-%.2f%%\t%s\t%.2f\t%s\t\n", p.Name, p.VotesPerItem, p.Votes,
			100*p.Accuracy, 100*p.AccuracyLow, 100*p.AccuracyHigh, conf, p.Cost, note)
	}
	tw.Flush()
	fmt.Fprintf(w, "\nAccuracy is against the simulated truth; %s.\n", rep.TieRule)
	if c := rep.Check; c.Policy != "" {
		fmt.Fprintf(w, "%s matches %s (%.2f%% >= %.2f%%) with %.0f%% of its votes.\n", c.Policy, c.Baseline, 100*c.Accuracy, 100*c.BaselineAccuracy, 100*c.VoteShare)
	} else {
		fmt.Fprintf(w, "No adaptive policy reached %s's accuracy (%.2f%%).\n", c.Baseline, 100*c.BaselineAccuracy)
	}
	fmt.Fprintf(w, "Cost is votes x %.4g %s. A per-vote rate should pay labellers at least the local minimum wage for the time a vote takes; local law decides.\n", rep.Rate, rep.Currency)
}

// chartSeries are the curves of the accuracy chart, one per family of
// policies, in the order of the legend.
var chartSeries = []struct {
	label, colour string
	match         func(p policyResult) bool
}{
	{"majority vote, fixed votes", "#1b6ca8", func(p policyResult) bool { return p.Method == "majority" }},
	{"Dawid-Skene, fixed votes", "#c0392b", func(p policyResult) bool { return p.Method == "dawid-skene" && !p.Adaptive }},
	{"adaptive, Dawid-Skene", "#2e7d32", func(p policyResult) bool { return p.Adaptive }},
}

// accuracySVG draws accuracy against votes per item, one line per family,
// with the baseline's accuracy as a dashed line. Hand-written SVG keeps the
// binary free of a charting library for one small chart.
func accuracySVG(rep *simReport) string {
	const w, h, left, right, top, bottom = 800.0, 480.0, 80.0, 220.0, 72.0, 70.0
	pw, ph := w-left-right, h-top-bottom
	minX, maxX, minY := math.Inf(1), math.Inf(-1), 1.0
	for _, p := range rep.Policies {
		minX, maxX, minY = min(minX, p.VotesPerItem), max(maxX, p.VotesPerItem), min(minY, p.Accuracy)
	}
	x0, x1 := max(0, math.Floor(minX)-1), math.Ceil(maxX)+1
	step := 0.05 // y ticks: the largest of 5%, 2%, 1% giving at least 4 ticks
	for _, s := range []float64{0.02, 0.01} {
		if (1-minY)/step < 4 {
			step = s
		}
	}
	y0 := math.Floor((minY-step/2)/step) * step
	y0 = max(y0, 0)
	px := func(x float64) float64 { return left + (x-x0)/(x1-x0)*pw }
	py := func(y float64) float64 { return top + (1-(y-y0)/(1-y0))*ph }

	var b strings.Builder
	fmt.Fprintf(&b, `<svg xmlns="http://www.w3.org/2000/svg" width="%g" height="%g" viewBox="0 0 %g %g" font-family="sans-serif" font-size="12">`+"\n", w, h, w, h)
	fmt.Fprintf(&b, `<rect width="%g" height="%g" fill="white"/>`+"\n", w, h)
	fmt.Fprintf(&b, `<text x="%g" y="24" font-size="16" font-weight="bold">Accuracy against votes per item</text>`+"\n", left)
	fmt.Fprintf(&b, `<text x="%g" y="40" fill="#555">Simulated crowd (invented figures): %d items, %d classes, seed %d</text>`+"\n",
		left, rep.Items, rep.Classes, rep.Seed)
	fmt.Fprintf(&b, `<text x="%g" y="54" fill="#555" font-size="11">crowd %s; %s</text>`+"\n", left, html.EscapeString(rep.Crowd), tieRule)
	for x := x0; x <= x1+1e-9; x++ {
		fmt.Fprintf(&b, `<line x1="%.1f" y1="%g" x2="%.1f" y2="%g" stroke="#ddd"/><text x="%.1f" y="%g" text-anchor="middle">%g</text>`+"\n",
			px(x), top, px(x), top+ph, px(x), top+ph+18, x)
	}
	for y := y0; y <= 1+1e-9; y += step {
		fmt.Fprintf(&b, `<line x1="%g" y1="%.1f" x2="%g" y2="%.1f" stroke="#ddd"/><text x="%g" y="%.1f" text-anchor="end">%.0f%%</text>`+"\n",
			left, py(y), left+pw, py(y), left-8, py(y)+4, 100*y)
	}
	fmt.Fprintf(&b, `<rect x="%g" y="%g" width="%g" height="%g" fill="none" stroke="#333"/>`+"\n", left, top, pw, ph)
	fmt.Fprintf(&b, `<text x="%g" y="%g" text-anchor="middle">votes per item (votes)</text>`+"\n", left+pw/2, h-20)
	fmt.Fprintf(&b, `<text transform="translate(22 %g) rotate(-90)" text-anchor="middle">accuracy against the simulated truth (%%)</text>`+"\n", top+ph/2)
	if c := rep.Check; c.Baseline != "" && c.BaselineAccuracy >= y0 {
		fmt.Fprintf(&b, `<line x1="%g" y1="%.1f" x2="%g" y2="%.1f" stroke="#888" stroke-dasharray="5 4"/><text x="%g" y="%.1f" fill="#555">%s</text>`+"\n",
			left, py(c.BaselineAccuracy), left+pw, py(c.BaselineAccuracy), left+pw+6, py(c.BaselineAccuracy)+4, c.Baseline)
	}
	for i, s := range chartSeries {
		var pts []policyResult
		for _, p := range rep.Policies {
			if s.match(p) {
				pts = append(pts, p)
			}
		}
		slices.SortFunc(pts, func(a, b policyResult) int { return cmp.Compare(a.VotesPerItem, b.VotesPerItem) })
		var line []string
		for _, p := range pts {
			line = append(line, fmt.Sprintf("%.1f,%.1f", px(p.VotesPerItem), py(p.Accuracy)))
		}
		fmt.Fprintf(&b, `<polyline points="%s" fill="none" stroke="%s" stroke-width="2"/>`+"\n", strings.Join(line, " "), s.colour)
		for _, p := range pts {
			fmt.Fprintf(&b, `<circle cx="%.1f" cy="%.1f" r="4" fill="%s"><title>%s: %.2f votes per item, %.2f%%</title></circle>`+"\n",
				px(p.VotesPerItem), py(p.Accuracy), s.colour, p.Name, p.VotesPerItem, 100*p.Accuracy)
			if p.Adaptive {
				fmt.Fprintf(&b, `<text x="%.1f" y="%.1f" fill="%s" font-size="11">%g</text>`+"\n", px(p.VotesPerItem)+6, py(p.Accuracy)+14, s.colour, p.Target)
			}
		}
		ly := top + 150 + float64(i)*22
		fmt.Fprintf(&b, `<line x1="%g" y1="%g" x2="%g" y2="%g" stroke="%s" stroke-width="2"/><text x="%g" y="%g">%s</text>`+"\n",
			left+pw+30, ly, left+pw+50, ly, s.colour, left+pw+56, ly+4, s.label)
	}
	fmt.Fprintf(&b, `<text x="%g" y="%g" fill="#555" font-size="11">labels: confidence target</text>`+"\n", left+pw+30, top+150+float64(len(chartSeries))*22)
	b.WriteString("</svg>\n")
	return b.String()
}
