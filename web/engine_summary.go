package web

import (
	"cmp"
	"context"
	"slices"
	"strconv"
	"time"

	"github.com/concord-labs/concord/agreement"
	"github.com/concord-labs/concord/store"
)

// Summary settings. 500 resamples keep a refit of a million votes to about
// a second; the percentile ends then rest on 12 resamples each, enough for
// a lead's page (DefaultResamples is 1000 for one-off reports).
const (
	summaryResamples = 500
	summaryPairs     = 10
)

// summarize computes the project's agreement picture from a fit.
func (s *Server) summarize(ctx context.Context, f *fitData, ds *agreement.DawidSkeneResult, hier *agreement.Hierarchy) (store.ProjectSummary, error) {
	v := f.votes
	sum := store.ProjectSummary{Method: store.MethodDS, Votes: v.Len(), Labellers: v.NumLabellers,
		KappaByLabel: map[string]*float64{}}
	for _, n := range f.seen {
		if n > 0 {
			sum.Items++
		}
	}
	counts, err := agreement.CountVotes(v)
	if err != nil {
		return sum, err
	}
	boot := agreement.BootstrapOptions{Resamples: summaryResamples, Seed: uint64(f.project.ReleaseSeed)}
	fl := agreement.FleissCounts(counts)
	sum.FleissSkipped = fl.Skipped
	sum.Fleiss = estimate(fl.Kappa, boot.Level)
	if fl.Defined() {
		if iv, err := agreement.BootstrapFleiss(counts, boot); err == nil && iv.Defined() {
			sum.Fleiss.Low, sum.Fleiss.High, sum.Fleiss.Level = finite(iv.Lower), finite(iv.Upper), iv.Level
		}
		if b, ok := agreement.LandisKoch(fl.Kappa); ok {
			sum.Fleiss.Band, sum.Fleiss.BandSource = b.Name, b.Source
		}
		for c, ok := range fl.CategoryOK {
			if ok {
				sum.KappaByLabel[f.keys[c]] = finite(fl.PerCategory[c])
			}
		}
	}
	al, err := agreement.AlphaCounts(counts, agreement.AlphaOptions{Metric: agreement.Nominal})
	if err != nil {
		return sum, err
	}
	sum.Alpha = estimate(al.Alpha, boot.Level)
	if al.Defined() {
		if iv, err := agreement.BootstrapAlpha(counts, agreement.AlphaOptions{Metric: agreement.Nominal}, boot); err == nil && iv.Defined() {
			sum.Alpha.Low, sum.Alpha.High, sum.Alpha.Level = finite(iv.Lower), finite(iv.Upper), iv.Level
		}
		if b, ok := agreement.KrippendorffRule(al.Alpha); ok {
			sum.Alpha.Band, sum.Alpha.BandSource = b.Name, b.Source
		}
	}
	sum.Labels, sum.Confusion = leafConfusion(f, ds)
	sum.ByDepth = byDepth(v, hier)
	if sum.Pairs, err = s.topPairs(ctx, f); err != nil {
		return sum, err
	}
	sum.OverTime = overTime(f)
	return sum, nil
}

func estimate(x, level float64) store.Estimate {
	if level == 0 {
		level = agreement.DefaultLevel
	}
	return store.Estimate{Value: finite(x), Level: level}
}

// leafConfusion counts votes for each leaf on items whose consensus is
// each leaf. Votes for, and consensus on, inner labels are left out.
func leafConfusion(f *fitData, ds *agreement.DawidSkeneResult) ([]string, [][]int) {
	isInner := make([]bool, len(f.classes))
	for _, p := range f.parent {
		if p >= 0 {
			isInner[p] = true
		}
	}
	row := make([]int, len(f.classes))
	var keys []string
	for c := range f.classes {
		row[c] = -1
		if !isInner[c] && leafInTaxonomy(f, c) {
			row[c] = len(keys)
			keys = append(keys, f.keys[c])
		}
	}
	m := make([][]int, len(keys))
	for i := range m {
		m[i] = make([]int, len(keys))
	}
	v := f.votes
	for i := range v.Len() {
		c := ds.Label[v.Item[i]]
		if c < 0 || row[c] < 0 || row[v.Label[i]] < 0 {
			continue
		}
		m[row[c]][row[v.Label[i]]]++
	}
	return keys, m
}

func leafInTaxonomy(f *fitData, c int) bool {
	for _, l := range f.labels {
		if l.ID == f.classes[c] {
			return l.IsLeaf
		}
	}
	return false
}

// byDepth measures agreement with every vote rolled up to each depth of
// the taxonomy: labellers who disagree on the bottle type may still agree
// on "plastic".
func byDepth(v *agreement.Votes, hier *agreement.Hierarchy) []store.DepthStats {
	deepest := 0
	for c := range v.NumClasses {
		deepest = max(deepest, hier.Depth(c))
	}
	var out []store.DepthStats
	for d := 0; d <= deepest; d++ {
		rolled := *v
		rolled.Label = make([]int32, v.Len())
		distinct := map[int32]bool{}
		for i, c := range v.Label {
			rolled.Label[i] = int32(hier.AtDepth(int(c), d))
			distinct[rolled.Label[i]] = true
		}
		ds := store.DepthStats{Depth: d, Labels: len(distinct)}
		if counts, err := agreement.CountVotes(&rolled); err == nil {
			if fl := agreement.FleissCounts(counts); fl.Defined() {
				ds.Fleiss = finite(fl.Kappa)
			}
			if al, err := agreement.AlphaCounts(counts, agreement.AlphaOptions{}); err == nil && al.Defined() {
				ds.Alpha = finite(al.Alpha)
			}
		}
		out = append(out, ds)
	}
	return out
}

// topPairs is Cohen's kappa between each pair of the most active labellers.
func (s *Server) topPairs(ctx context.Context, f *fitData) ([]store.PairStats, error) {
	v := f.votes
	per := make([]int, v.NumLabellers)
	for _, l := range v.Labeller {
		per[l]++
	}
	order := make([]int, v.NumLabellers)
	for i := range order {
		order[i] = i
	}
	slices.SortFunc(order, func(a, b int) int { return cmp.Or(cmp.Compare(per[b], per[a]), cmp.Compare(a, b)) })
	top := map[int32]int32{}
	for i, l := range order[:min(summaryPairs, len(order))] {
		top[int32(l)] = int32(i)
	}
	sub := &agreement.Votes{NumItems: v.NumItems, NumLabellers: len(top), NumClasses: v.NumClasses}
	for i := range v.Len() {
		if l, ok := top[v.Labeller[i]]; ok {
			sub.Item = append(sub.Item, v.Item[i])
			sub.Labeller = append(sub.Labeller, l)
			sub.Label = append(sub.Label, v.Label[i])
		}
	}
	pairs, err := agreement.PairwiseCohen(sub, agreement.PairOptions{})
	if err != nil {
		return nil, err
	}
	logins := map[int64]string{}
	members, err := s.store.Members(ctx, f.project.ID)
	if err != nil {
		return nil, err
	}
	for _, m := range members {
		logins[m.User.ID] = m.User.Login
	}
	name := func(l int32) string {
		id := f.labIDs[order[l]]
		if n, ok := logins[id]; ok {
			return n
		}
		return "user " + strconv.FormatInt(id, 10)
	}
	out := make([]store.PairStats, 0, len(pairs))
	for _, p := range pairs {
		ps := store.PairStats{A: name(p.A), B: name(p.B), Items: p.Items}
		if p.OK {
			ps.Kappa, ps.SE = finite(p.Kappa), finite(p.SE)
		}
		out = append(out, ps)
	}
	return out, nil
}

// overTime is Fleiss' kappa among each UTC day's votes.
func overTime(f *fitData) []store.TimeStats {
	v := f.votes
	byDay := map[time.Time][]int{}
	var days []time.Time
	for i, at := range f.at {
		d := at.UTC().Truncate(24 * time.Hour)
		if _, ok := byDay[d]; !ok {
			days = append(days, d)
		}
		byDay[d] = append(byDay[d], i)
	}
	slices.SortFunc(days, time.Time.Compare)
	out := make([]store.TimeStats, 0, len(days))
	for _, d := range days {
		idx := byDay[d]
		day := &agreement.Votes{NumItems: v.NumItems, NumLabellers: v.NumLabellers, NumClasses: v.NumClasses}
		for _, i := range idx {
			day.Item = append(day.Item, v.Item[i])
			day.Labeller = append(day.Labeller, v.Labeller[i])
			day.Label = append(day.Label, v.Label[i])
		}
		ts := store.TimeStats{Start: d, Votes: len(idx)}
		if counts, err := agreement.CountVotes(day); err == nil {
			if fl := agreement.FleissCounts(counts); fl.Defined() {
				ts.Fleiss = finite(fl.Kappa)
			}
		}
		out = append(out, ts)
	}
	return out
}
