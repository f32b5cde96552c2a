package main

import (
	"cmp"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/concord-labs/concord/agreement"
)

const agreeUsage = `agree --votes votes.csv [--gold gold.csv] [--method ds|mv] [--target 0.95]
       [--min-votes 2] [--max-votes 7] [--json]

Analyses votes collected anywhere, without a database: consensus per item,
Fleiss' kappa and Krippendorff's alpha with bootstrap intervals, a report per
labeller, and which items need more votes or a lead's review.

votes.csv  header naming item, labeller and label (any order; rename them with
           --columns), optional seconds (time the vote took; empty = unknown);
           other columns are ignored. A labeller voting twice on one item: the
           later vote is kept, a warning names both lines, and the JSON counts
           them in duplicate_votes.
gold.csv   header item,label. Gold items nobody voted on are skipped (warned);
           a gold label no vote used is added as a class.

With --method ds gold answers are held fixed in the Dawid-Skene fit that gives
the consensus, so their consensus is the gold label by construction. The gold
accuracy reported therefore comes from a second fit WITHOUT gold held fixed
(gold.method in the JSON says which). With --method mv the consensus is plain
majority vote; a tie gets no label (null, "tied": true in the JSON) and counts
as wrong in the gold accuracy (accuracy_ties_split scores it 1/(labels tied)).
Either way the labeller report and the vote policy use the Dawid-Skene fit
with gold held fixed: with --method mv each item's label and confidence are
majority vote's, but its status, more votes and place in the queue come from
the Dawid-Skene posterior (vote shares are not probabilities), so a unanimous
item can still need votes and a tie can be done.
Accuracies and flags are estimates meant to start a conversation with a
labeller; where they touch pay or hours, local law and agreements apply.`

// agreeOptions are agree's flags.
type agreeOptions struct {
	votes, gold string
	method      string
	cols        voteColumns
	policy      agreement.VotePolicy
	json        bool
	bootstrap   int
	seed        uint64
	minShared   int
	fastSeconds float64
	smoothing   float64
	top         int
}

func runAgree(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "agree", agreeUsage)
	var o agreeOptions
	var columns string
	fs.StringVar(&o.votes, "votes", "", "votes CSV file (required)")
	fs.StringVar(&o.gold, "gold", "", "gold answers CSV file (item,label)")
	fs.StringVar(&o.method, "method", "ds", "consensus method: ds (Dawid-Skene) or mv (majority vote)")
	fs.Float64Var(&o.policy.Target, "target", 0.95, "confidence an item's consensus needs to be done")
	fs.IntVar(&o.policy.MinVotes, "min-votes", 2, "votes every item needs before it can be done")
	fs.IntVar(&o.policy.MaxVotes, "max-votes", 7, "votes after which an item below target goes to review")
	fs.BoolVar(&o.json, "json", false, "print one JSON object instead of the report")
	fs.IntVar(&o.bootstrap, "bootstrap", agreement.DefaultResamples, "bootstrap resamples for the 95% intervals (0: none)")
	fs.Uint64Var(&o.seed, "seed", 1, "seed of the bootstrap")
	fs.IntVar(&o.minShared, "min-shared", agreement.DefaultMinShared, "shared items a pair of labellers needs for Cohen's kappa")
	fs.Float64Var(&o.fastSeconds, "fast-seconds", 1, "median seconds per vote below which a labeller is flagged too fast")
	fs.StringVar(&columns, "columns", "", "votes column names, e.g. item=subject,labeller=rater,label=category")
	fs.Float64Var(&o.smoothing, "smoothing", agreement.DefaultSmoothing, "Dawid-Skene pseudo-count per confusion cell and prior")
	fs.IntVar(&o.top, "top", 20, "rows per table in the text report (0: all)")
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	switch {
	case o.votes == "":
		return usagef("agree: --votes is required")
	case fs.NArg() > 0:
		return usagef("agree: unexpected argument %q", fs.Arg(0))
	case o.method != "ds" && o.method != "mv":
		return usagef("agree: --method %q: want ds or mv", o.method)
	case o.bootstrap < 0:
		return usagef("agree: --bootstrap %d is negative", o.bootstrap)
	case !(o.smoothing > 0):
		return usagef("agree: --smoothing %g: want a number above 0", o.smoothing)
	case o.minShared < 1:
		return usagef("agree: --min-shared %d: want at least 1", o.minShared)
	}
	if err := o.policy.Validate(); err != nil {
		return usagef("agree: %v", err)
	}
	var err error
	if o.cols, err = parseColumns(columns); err != nil {
		return usagef("agree: %v", err)
	}

	vt, gold, err := loadAgreeInput(e, o)
	if err != nil {
		return err
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	rep, err := analyseVotes(vt, gold, o)
	if err != nil {
		return err
	}
	if o.json {
		enc := json.NewEncoder(e.stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(rep); err != nil {
			return fmt.Errorf("agree: write JSON: %w", err)
		}
		return nil
	}
	printAgreeReport(e.stdout, rep, o)
	return nil
}

// loadAgreeInput reads the votes and gold files and prints their warnings.
func loadAgreeInput(e *env, o agreeOptions) (*voteTable, *goldSet, error) {
	vt, err := readCSVFile(o.votes, func(r io.Reader) (*voteTable, error) { return readVotesCSV(o.votes, r, o.cols) })
	if err != nil {
		return nil, nil, err
	}
	if vt.votes.Len() == 0 {
		return nil, nil, fmt.Errorf("%s: no votes after the header", o.votes)
	}
	const shown = 20
	for i, d := range vt.duplicates {
		if i == shown {
			fmt.Fprintf(e.stderr, "concord agree: ... and %d more duplicate votes\n", len(vt.duplicates)-shown)
			break
		}
		fmt.Fprintf(e.stderr, "concord agree: %s:%d: labeller %q voted on item %q again (earlier vote on line %d); the later vote is kept\n",
			o.votes, d.Line, d.Labeller, d.Item, d.Earlier)
	}
	if o.gold == "" {
		return vt, nil, nil
	}
	gold, err := readCSVFile(o.gold, func(r io.Reader) (*goldSet, error) { return readGoldCSV(o.gold, r, vt) })
	if err != nil {
		return nil, nil, err
	}
	if gold.unvoted > 0 {
		fmt.Fprintf(e.stderr, "concord agree: %s:%d: %d gold items have no votes and are skipped (the first is on this line)\n",
			o.gold, gold.firstUnvoted, gold.unvoted)
	}
	if len(gold.addedClasses) > 0 {
		fmt.Fprintf(e.stderr, "concord agree: %s: gold labels no vote used, added as classes: %s\n", o.gold, strings.Join(gold.addedClasses, ", "))
		vt.votes.NumClasses = len(gold.classes)
	}
	return vt, gold, nil
}

func readCSVFile[T any](path string, parse func(io.Reader) (T, error)) (T, error) {
	f, err := os.Open(path)
	if err != nil {
		var zero T
		return zero, fmt.Errorf("agree: %w", err)
	}
	defer f.Close()
	return parse(f)
}

// nfloat is a float that encodes NaN and ±Inf as JSON null: the statistics
// mark undefined values with NaN, and encoding/json refuses those outright.
type nfloat float64

func (x nfloat) MarshalJSON() ([]byte, error) {
	f := float64(x)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

func (x nfloat) defined() bool { return !math.IsNaN(float64(x)) && !math.IsInf(float64(x), 0) }

// agreeReport is agree's whole result: the JSON object, and what the text
// report prints.
type agreeReport struct {
	Items          int      `json:"items"`
	Labellers      int      `json:"labellers"`
	Votes          int      `json:"votes"`
	DuplicateVotes int      `json:"duplicate_votes"`
	Classes        []string `json:"classes"`
	Method         string   `json:"method"`
	MethodName     string   `json:"method_name"`
	Policy         struct {
		MinVotes int    `json:"min_votes"`
		MaxVotes int    `json:"max_votes"`
		Target   nfloat `json:"target"`
	} `json:"policy"`

	FleissKappa         nfloat            `json:"fleiss_kappa"`
	FleissKappaInterval *intervalJSON     `json:"fleiss_kappa_interval"`
	FleissKappaBand     *bandJSON         `json:"fleiss_kappa_band"`
	FleissKappaByClass  map[string]nfloat `json:"fleiss_kappa_by_class"`
	FleissItems         int               `json:"fleiss_items"`
	FleissSkipped       int               `json:"fleiss_items_skipped"` // items with fewer than two votes

	KrippendorffAlpha         nfloat        `json:"krippendorff_alpha"`
	KrippendorffAlphaInterval *intervalJSON `json:"krippendorff_alpha_interval"`
	KrippendorffAlphaBand     *bandJSON     `json:"krippendorff_alpha_band"`

	DawidSkene struct {
		Iterations    int    `json:"iterations"`
		Converged     bool   `json:"converged"`
		LogLikelihood nfloat `json:"log_likelihood"`
	} `json:"dawid_skene"`

	Status struct {
		Done       int `json:"done"`
		NeedsVotes int `json:"needs_votes"`
		Review     int `json:"review"`
	} `json:"status"`
	Consensus []consensusJSON `json:"consensus"`
	// Queue lists the items needing votes, the most useful next vote first.
	Queue []queueJSON `json:"queue"`

	LabellersReport []labellerJSON `json:"labellers_report"`
	PairsMinShared  int            `json:"pairs_min_shared"`
	Pairs           []pairJSON     `json:"pairs"`

	Gold *goldJSON `json:"gold,omitempty"`
}

type intervalJSON struct {
	Lower     nfloat `json:"lower"`
	Upper     nfloat `json:"upper"`
	Level     nfloat `json:"level"`
	Resamples int    `json:"resamples"`
	Undefined int    `json:"undefined_resamples"`
	Seed      uint64 `json:"seed"`
}

type bandJSON struct {
	Name   string `json:"name"`
	Source string `json:"source"`
}

type consensusJSON struct {
	Item       string   `json:"item"`
	Label      *string  `json:"label"`
	Confidence nfloat   `json:"confidence"`
	Votes      int      `json:"votes"`
	Status     string   `json:"status"`
	MoreVotes  int      `json:"more_votes,omitempty"`
	Tied       bool     `json:"tied,omitempty"`
	TiedLabels []string `json:"tied_labels,omitempty"`
	GoldFixed  bool     `json:"gold_fixed,omitempty"`
}

type queueJSON struct {
	Item       string `json:"item"`
	MoreVotes  int    `json:"more_votes"`
	Gain       nfloat `json:"gain"`
	Confidence nfloat `json:"confidence"`
	Votes      int    `json:"votes"`
}

type labellerJSON struct {
	Labeller           string   `json:"labeller"`
	Votes              int      `json:"votes"`
	Accuracy           nfloat   `json:"accuracy"` // Dawid-Skene estimate
	GoldVotes          int      `json:"gold_votes"`
	GoldCorrect        int      `json:"gold_correct"`
	GoldAccuracy       nfloat   `json:"gold_accuracy"`
	GoldLow            nfloat   `json:"gold_accuracy_low"`  // 95% Wilson interval
	GoldHigh           nfloat   `json:"gold_accuracy_high"` // 95% Wilson interval
	ConsensusVotes     int      `json:"consensus_votes"`
	ConsensusAgreement nfloat   `json:"consensus_agreement"` // with the leave-one-out majority
	KappaVsConsensus   nfloat   `json:"kappa_vs_consensus"`
	MedianSeconds      nfloat   `json:"median_seconds"`
	TopLabel           string   `json:"top_label"`
	TopLabelShare      nfloat   `json:"top_label_share"`
	Flags              []string `json:"flags"`
}

type pairJSON struct {
	A          string `json:"a"`
	B          string `json:"b"`
	Items      int    `json:"items"`
	CohenKappa nfloat `json:"cohen_kappa"`
	SE         nfloat `json:"se"`
}

type goldJSON struct {
	Items       int      `json:"items"` // gold items with votes, the ones scored
	Correct     int      `json:"correct"`
	Accuracy    nfloat   `json:"accuracy"`
	Method      string   `json:"method"`
	Tied        int      `json:"tied,omitempty"`
	TiesSplit   *nfloat  `json:"accuracy_ties_split,omitempty"`
	Unvoted     int      `json:"unvoted_items"`
	AddedLabels []string `json:"added_classes"`
}

// Gold-accuracy methods, as gold.method reports them.
const (
	goldMethodDS = "dawid-skene fit without gold held fixed"
	goldMethodMV = "majority vote (gold not used); a tie counts as wrong"
)

// analyseVotes computes everything agree reports.
func analyseVotes(vt *voteTable, gold *goldSet, o agreeOptions) (*agreeReport, error) {
	v := vt.votes
	classes := vt.builder.ClassNames()
	var fixed map[int]int
	if gold != nil {
		classes, fixed = gold.classes, gold.class
	}
	items, labellers := vt.builder.ItemNames(), vt.builder.LabellerNames()
	rep := &agreeReport{
		Items: v.NumItems, Labellers: v.NumLabellers, Votes: v.Len(), DuplicateVotes: len(vt.duplicates),
		Classes: classes, Method: o.method, PairsMinShared: o.minShared,
	}
	rep.Policy.MinVotes, rep.Policy.MaxVotes, rep.Policy.Target = o.policy.MinVotes, o.policy.MaxVotes, nfloat(o.policy.Target)

	if err := agreementStats(rep, v, classes, o); err != nil {
		return nil, err
	}

	ds, err := agreement.DawidSkene(v, agreement.DawidSkeneOptions{Fixed: fixed, Smoothing: o.smoothing})
	if err != nil {
		return nil, fmt.Errorf("agree: Dawid-Skene: %w", err)
	}
	rep.DawidSkene.Iterations, rep.DawidSkene.Converged, rep.DawidSkene.LogLikelihood = ds.Iterations, ds.Converged, nfloat(ds.LogLikelihood)
	cons := &ds.Consensus
	var mv *agreement.Majority
	if o.method == "mv" {
		rep.MethodName = "majority vote"
		if mv, err = agreement.MajorityVote(v); err != nil {
			return nil, fmt.Errorf("agree: majority vote: %w", err)
		}
		cons = &mv.Consensus
	} else {
		rep.MethodName = "Dawid-Skene"
	}

	// The policy plans from the Dawid-Skene posteriors whatever --method
	// reports: vote shares are not probabilities (two careless labellers
	// agreeing give a share of 1), and its look-ahead multiplies the
	// posterior by the fitted confusion matrices.
	plans, err := o.policy.Plan(&ds.Consensus, agreement.AverageConfusion(ds))
	if err != nil {
		return nil, fmt.Errorf("agree: vote policy: %w", err)
	}
	rep.Consensus = make([]consensusJSON, v.NumItems)
	for i, pl := range plans {
		c := consensusJSON{Item: items[i], Confidence: nfloat(cons.Confidence[i]), Votes: pl.Votes, Status: pl.Status.String(), MoreVotes: pl.MoreVotes}
		if l := cons.Label[i]; l >= 0 {
			c.Label = &classes[l]
		}
		if mv != nil && mv.Tied[i] {
			c.Tied = true
			for _, l := range mv.TiedLabels(i) {
				c.TiedLabels = append(c.TiedLabels, classes[l])
			}
		}
		if _, ok := fixed[i]; ok && mv == nil {
			c.GoldFixed = true
		}
		switch pl.Status {
		case agreement.StatusDone:
			rep.Status.Done++
		case agreement.StatusNeedsVotes:
			rep.Status.NeedsVotes++
		case agreement.StatusReview:
			rep.Status.Review++
		}
		rep.Consensus[i] = c
	}
	rep.Queue = []queueJSON{}
	for _, pl := range agreement.Queue(plans) {
		rep.Queue = append(rep.Queue, queueJSON{Item: items[pl.Item], MoreVotes: pl.MoreVotes, Gain: nfloat(pl.Gain), Confidence: nfloat(pl.Confidence), Votes: pl.Votes})
	}

	rel, err := agreement.Reliability(v, ds, fixed, agreement.ReliabilityOptions{MinSeconds: o.fastSeconds})
	if err != nil {
		return nil, fmt.Errorf("agree: labeller reliability: %w", err)
	}
	rep.LabellersReport = make([]labellerJSON, len(rel))
	for i, r := range rel {
		flags := []string{}
		if s := r.Flags.String(); s != "" {
			flags = strings.Split(s, ",")
		}
		rep.LabellersReport[i] = labellerJSON{
			Labeller: labellers[r.Labeller], Votes: r.Votes, Accuracy: nfloat(r.EstimatedAccuracy),
			GoldVotes: r.GoldVotes, GoldCorrect: r.GoldCorrect, GoldAccuracy: nfloat(r.GoldAccuracy), GoldLow: nfloat(r.GoldLo), GoldHigh: nfloat(r.GoldHi),
			ConsensusVotes: r.ConsensusVotes, ConsensusAgreement: nfloat(r.ConsensusAgreement), KappaVsConsensus: nfloat(r.KappaVsConsensus),
			MedianSeconds: nfloat(r.MedianSeconds), TopLabel: classes[r.TopLabel], TopLabelShare: nfloat(r.TopLabelShare), Flags: flags,
		}
	}

	pairs, err := agreement.PairwiseCohen(v, agreement.PairOptions{MinShared: o.minShared})
	if err != nil {
		return nil, fmt.Errorf("agree: Cohen's kappa per pair: %w", err)
	}
	rep.Pairs = make([]pairJSON, len(pairs))
	for i, p := range pairs {
		rep.Pairs[i] = pairJSON{A: labellers[p.A], B: labellers[p.B], Items: p.Items, CohenKappa: nfloat(p.Kappa), SE: nfloat(p.SE)}
	}

	if gold != nil {
		if rep.Gold, err = goldAccuracy(v, gold, ds, mv, o.smoothing); err != nil {
			return nil, err
		}
	}
	return rep, nil
}

// agreementStats fills in Fleiss' kappa and Krippendorff's alpha with their
// intervals and bands.
func agreementStats(rep *agreeReport, v *agreement.Votes, classes []string, o agreeOptions) error {
	counts, err := agreement.CountVotes(v)
	if err != nil {
		return fmt.Errorf("agree: count votes: %w", err)
	}
	fl := agreement.FleissCounts(counts)
	rep.FleissKappa, rep.FleissItems, rep.FleissSkipped = nfloat(fl.Kappa), fl.Items, fl.Skipped
	rep.FleissKappaByClass = make(map[string]nfloat, len(classes))
	for j, name := range classes {
		rep.FleissKappaByClass[name] = nfloat(math.NaN())
		if j < len(fl.PerCategory) && fl.CategoryOK[j] {
			rep.FleissKappaByClass[name] = nfloat(fl.PerCategory[j])
		}
	}
	if b, ok := agreement.LandisKoch(fl.Kappa); ok {
		rep.FleissKappaBand = &bandJSON{b.Name, b.Source}
	}
	nominal := agreement.AlphaOptions{Metric: agreement.Nominal}
	al, err := agreement.AlphaCounts(counts, nominal)
	if err != nil {
		return fmt.Errorf("agree: Krippendorff's alpha: %w", err)
	}
	rep.KrippendorffAlpha = nfloat(al.Alpha)
	if b, ok := agreement.KrippendorffRule(al.Alpha); ok {
		rep.KrippendorffAlphaBand = &bandJSON{b.Name, b.Source}
	}
	if o.bootstrap == 0 {
		return nil
	}
	bo := agreement.BootstrapOptions{Resamples: o.bootstrap, Seed: o.seed}
	bf, err := agreement.BootstrapFleiss(counts, bo)
	if err != nil {
		return fmt.Errorf("agree: bootstrap Fleiss' kappa: %w", err)
	}
	ba, err := agreement.BootstrapAlpha(counts, nominal, bo)
	if err != nil {
		return fmt.Errorf("agree: bootstrap Krippendorff's alpha: %w", err)
	}
	rep.FleissKappaInterval, rep.KrippendorffAlphaInterval = newIntervalJSON(bf, o.seed), newIntervalJSON(ba, o.seed)
	return nil
}

func newIntervalJSON(iv agreement.BootstrapInterval, seed uint64) *intervalJSON {
	if !iv.Defined() {
		return nil
	}
	return &intervalJSON{Lower: nfloat(iv.Lower), Upper: nfloat(iv.Upper), Level: nfloat(iv.Level), Resamples: iv.Resamples, Undefined: iv.Undefined, Seed: seed}
}

// goldAccuracy scores the consensus against gold without letting gold
// decide it: for Dawid-Skene a second fit with nothing held fixed, for
// majority vote the votes alone.
func goldAccuracy(v *agreement.Votes, gold *goldSet, fixedFit *agreement.DawidSkeneResult, mv *agreement.Majority, smoothing float64) (*goldJSON, error) {
	g := &goldJSON{Items: len(gold.class), Unvoted: gold.unvoted, AddedLabels: gold.addedClasses}
	if g.AddedLabels == nil {
		g.AddedLabels = []string{}
	}
	if mv != nil {
		g.Method = goldMethodMV
		split := 0.0
		for item, c := range gold.class {
			if tied := mv.TiedLabels(item); tied != nil {
				g.Tied++
				if slices.Contains(tied, c) {
					split += 1 / float64(len(tied))
				}
			} else if int(mv.Label[item]) == c {
				g.Correct++
				split++
			}
		}
		ts := nfloat(split / float64(g.Items))
		g.TiesSplit = &ts
	} else {
		g.Method = goldMethodDS
		free := fixedFit
		if len(gold.class) > 0 {
			var err error
			if free, err = agreement.DawidSkene(v, agreement.DawidSkeneOptions{Smoothing: smoothing}); err != nil {
				return nil, fmt.Errorf("agree: Dawid-Skene without gold: %w", err)
			}
		}
		for item, c := range gold.class {
			if int(free.Label[item]) == c {
				g.Correct++
			}
		}
	}
	g.Accuracy = nfloat(float64(g.Correct) / float64(g.Items))
	return g, nil
}

// printAgreeReport writes the text report, each line within 100 columns.
func printAgreeReport(w io.Writer, rep *agreeReport, o agreeOptions) {
	fmt.Fprintf(w, "Votes: %s\n", o.votes)
	fmt.Fprintf(w, "  %d items, %d labellers, %d votes, %d classes", rep.Items, rep.Labellers, rep.Votes, len(rep.Classes))
	if rep.DuplicateVotes > 0 {
		fmt.Fprintf(w, ", %d duplicate votes (later kept)", rep.DuplicateVotes)
	}
	fmt.Fprintf(w, "\n  classes: %s\n", clip(strings.Join(rep.Classes, ", "), 88))
	fmt.Fprintf(w, "  consensus: %s", rep.MethodName)
	fmt.Fprintf(w, " (Dawid-Skene EM: %d iterations, converged %v)\n", rep.DawidSkene.Iterations, rep.DawidSkene.Converged)

	fmt.Fprintf(w, "\nAgreement beyond chance (%d items with 2+ votes; %d with fewer left out)\n", rep.FleissItems, rep.FleissSkipped)
	printStatLine(w, "Fleiss' kappa", rep.FleissKappa, rep.FleissKappaInterval, rep.FleissKappaBand)
	printStatLine(w, "Krippendorff's alpha", rep.KrippendorffAlpha, rep.KrippendorffAlphaInterval, rep.KrippendorffAlphaBand)
	if rep.FleissKappaInterval != nil {
		fmt.Fprintf(w, "  (95%% percentile bootstrap over items, %d resamples, seed %d)\n", rep.FleissKappaInterval.Resamples, rep.FleissKappaInterval.Seed)
	}
	fmt.Fprintln(w, "  Fleiss' kappa per class:")
	for _, c := range rep.Classes {
		fmt.Fprintf(w, "    %-24s %s\n", clip(c, 24), fmtNF(rep.FleissKappaByClass[c], 3))
	}

	printLabellerTable(w, rep, o.top)

	p := rep.Policy
	fmt.Fprintf(w, "\nVote policy: min %d, max %d votes, target %.2f: %d done, %d need votes, %d to review\n",
		p.MinVotes, p.MaxVotes, float64(p.Target), rep.Status.Done, rep.Status.NeedsVotes, rep.Status.Review)
	if len(rep.Queue) > 0 {
		fmt.Fprintln(w, "Items needing votes, most useful next vote first (one-vote expected gain):")
		byItem := consensusByItem(rep)
		tw := newAgreeTable(w)
		fmt.Fprintln(tw, "  item\tlabel\tconfidence\tvotes\tmore\tgain")
		for i, q := range rep.Queue {
			if o.top > 0 && i == o.top {
				fmt.Fprintf(tw, "  ... %d more (--top 0 or --json lists all)\n", len(rep.Queue)-i)
				break
			}
			c := byItem[q.Item]
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%d\t%d\t%s\n", clip(q.Item, 24), clip(labelText(c), 20), fmtNF(q.Confidence, 3), q.Votes, q.MoreVotes, fmtNF(q.Gain, 4))
		}
		tw.Flush()
	}
	var review []consensusJSON
	for _, c := range rep.Consensus {
		if c.Status == "review" {
			review = append(review, c)
		}
	}
	if len(review) > 0 {
		slices.SortStableFunc(review, func(a, b consensusJSON) int { return cmp.Compare(a.Confidence, b.Confidence) })
		fmt.Fprintf(w, "Items for a lead's review (%d or more votes, still below target), least confident first:\n", p.MaxVotes)
		tw := newAgreeTable(w)
		fmt.Fprintln(tw, "  item\tlabel\tconfidence\tvotes")
		for i, c := range review {
			if o.top > 0 && i == o.top {
				fmt.Fprintf(tw, "  ... %d more (--top 0 or --json lists all)\n", len(review)-i)
				break
			}
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%d\n", clip(c.Item, 24), clip(labelText(c), 20), fmtNF(c.Confidence, 3), c.Votes)
		}
		tw.Flush()
	}

	if g := rep.Gold; g != nil {
		fmt.Fprintf(w, "\nGold: consensus right on %d of %d gold items, accuracy %s\n", g.Correct, g.Items, fmtNF(g.Accuracy, 4))
		fmt.Fprintf(w, "  method: %s", g.Method)
		if g.TiesSplit != nil {
			fmt.Fprintf(w, "; %d ties, %s with ties split", g.Tied, fmtNF(*g.TiesSplit, 4))
		}
		fmt.Fprintln(w)
		if g.Unvoted > 0 {
			fmt.Fprintf(w, "  %d gold items without votes skipped\n", g.Unvoted)
		}
	}
	fmt.Fprintln(w, "\nAccuracies and flags are estimates to start a conversation with a labeller, not verdicts;")
	fmt.Fprintln(w, "where they touch pay or hours, follow local law and the agreements that apply.")
}

func printStatLine(w io.Writer, name string, x nfloat, iv *intervalJSON, b *bandJSON) {
	ci := "95% CI n/a"
	if iv != nil {
		ci = fmt.Sprintf("95%% CI %s to %s", fmtNF(iv.Lower, 3), fmtNF(iv.Upper, 3))
	}
	band := "no band (undefined)"
	if b != nil {
		band = b.Name
	}
	fmt.Fprintf(w, "  %-21s %7s  %-22s %s\n", name, fmtNF(x, 3), ci, band)
	if b != nil {
		wrapText(w, "    band from ", b.Source, 100)
	}
}

// printLabellerTable lists labellers, flagged ones first and then by
// estimated accuracy, lowest first: the rows a lead should read first.
func printLabellerTable(w io.Writer, rep *agreeReport, top int) {
	ls := slices.Clone(rep.LabellersReport)
	slices.SortStableFunc(ls, func(a, b labellerJSON) int {
		return cmp.Or(cmp.Compare(len(b.Flags), len(a.Flags)), cmp.Compare(a.Accuracy, b.Accuracy))
	})
	fmt.Fprintln(w, "\nLabellers, flagged first, then lowest estimated accuracy first")
	fmt.Fprintln(w, "  acc.est: Dawid-Skene estimate; gold: accuracy on gold items [95% Wilson interval];")
	fmt.Fprintln(w, "  agree: share matching the leave-one-out majority of the other votes;")
	fmt.Fprintln(w, "  flags: fast (median below --fast-seconds), random (near-random votes), overuse (one label)")
	tw := newAgreeTable(w)
	fmt.Fprintln(tw, "  labeller\tvotes\tacc.est\tgold [95%]\tgold n\tagree\tmedian s\tflags")
	for i, l := range ls {
		if top > 0 && i == top {
			fmt.Fprintf(tw, "  ... %d more (--top 0 or --json lists all)\n", len(ls)-i)
			break
		}
		goldCol := "-"
		if l.GoldVotes > 0 {
			goldCol = fmt.Sprintf("%s %s-%s", fmtNF(l.GoldAccuracy, 2), fmtNF(l.GoldLow, 2), fmtNF(l.GoldHigh, 2))
		}
		flags := make([]string, len(l.Flags))
		for i, f := range l.Flags {
			flags[i] = cmp.Or(shortFlag[f], f)
		}
		fmt.Fprintf(tw, "  %s\t%d\t%s\t%s\t%d\t%s\t%s\t%s\n", clip(l.Labeller, 16), l.Votes, fmtNF(l.Accuracy, 3), goldCol, l.GoldVotes,
			fmtNF(l.ConsensusAgreement, 3), fmtNF(l.MedianSeconds, 1), strings.Join(flags, ","))
	}
	tw.Flush()
}

func consensusByItem(rep *agreeReport) map[string]consensusJSON {
	m := make(map[string]consensusJSON, len(rep.Consensus))
	for _, c := range rep.Consensus {
		m[c.Item] = c
	}
	return m
}

func labelText(c consensusJSON) string {
	switch {
	case c.Label != nil:
		return *c.Label
	case c.Tied:
		return "tie: " + strings.Join(c.TiedLabels, "/")
	}
	return "-"
}

func fmtNF(x nfloat, prec int) string {
	if !x.defined() {
		return "n/a"
	}
	return strconv.FormatFloat(float64(x), 'f', prec, 64)
}

// clip shortens s to n runes so long names cannot push a table past 100
// columns.
func clip(s string, n int) string {
	r := []rune(s)
	if len(r) <= n {
		return s
	}
	return string(r[:n-1]) + "…"
}

func newAgreeTable(w io.Writer) *tabwriter.Writer {
	return tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
}

// shortFlag names the reliability flags in the text table's narrow column.
var shortFlag = map[string]string{"too_fast": "fast", "near_random": "random", "overused_label": "overuse"}

// wrapText writes prefix and s, wrapped at spaces to width columns, with
// continuation lines indented like the prefix.
func wrapText(w io.Writer, prefix, s string, width int) {
	indent := strings.Repeat(" ", len(prefix))
	line := prefix
	for i, word := range strings.Fields(s) {
		if i > 0 && len(line)+1+len(word) > width {
			fmt.Fprintln(w, line)
			line = indent + word
			continue
		}
		if i > 0 {
			line += " "
		}
		line += word
	}
	fmt.Fprintln(w, line)
}
