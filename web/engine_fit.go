package web

import (
	"cmp"
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"github.com/concord-labs/concord/agreement"
	"github.com/concord-labs/concord/store"
)

// maxModelClasses bounds the taxonomies whose per-labeller matrices are
// stored for the vote path: K*K cells per labeller must stay a small row.
// Larger fits store figures only and the vote path uses one-coin matrices.
const maxModelClasses = 64

// fitData is one project's votes in the dense form agreement wants, with
// the maps back to database ids.
type fitData struct {
	project   store.Project
	labels    []store.Label
	classes   []int64 // class -> label id, taxonomy pre-order
	keys      []string
	parent    []int
	itemIDs   []int64 // dense item -> id (every item of the project)
	labIDs    []int64 // dense labeller -> user id
	seen      []int   // labelled votes per dense item
	votes     *agreement.Votes
	at        []time.Time
	gold      map[int]int // dense item -> class
	goldItems map[int64]bool
	counts    store.VoteCounts // for the progress and cost pages
}

// loadFit reads a project's items, votes, known answers and taxonomy.
func (s *Server) loadFit(ctx context.Context, projectID int64) (*fitData, error) {
	p, err := s.store.ProjectByID(ctx, projectID)
	if err != nil {
		return nil, err
	}
	labels, err := s.store.Labels(ctx, projectID)
	if err != nil {
		return nil, err
	}
	itemIDs, _, _, err := s.store.ItemStates(ctx, projectID)
	if err != nil {
		return nil, err
	}
	vc, err := s.store.ProjectVotes(ctx, projectID)
	if err != nil {
		return nil, err
	}
	gold, err := s.store.GoldLabels(ctx, projectID)
	if err != nil {
		return nil, err
	}
	f := &fitData{project: p, labels: labels, itemIDs: itemIDs, gold: map[int]int{}, goldItems: map[int64]bool{},
		counts: countVotes(&vc)}

	// Classes are the labels in use (votes, known answers) and their
	// ancestors, so the roll-up has every parent and a 10,000-label
	// taxonomy costs only what its labellers touch.
	pos := make(map[int64]int, len(labels))
	for i, l := range labels {
		pos[l.ID] = i
	}
	used := map[int64]bool{}
	mark := func(id int64) {
		for !used[id] {
			i, ok := pos[id]
			if !ok {
				return
			}
			used[id] = true
			if labels[i].ParentID == nil {
				return
			}
			id = *labels[i].ParentID
		}
	}
	for _, l := range vc.Label {
		mark(l)
	}
	for _, l := range gold {
		mark(l)
	}
	classOf := map[int64]int{}
	for _, l := range labels {
		if used[l.ID] {
			classOf[l.ID] = len(f.classes)
			f.classes = append(f.classes, l.ID)
			f.keys = append(f.keys, l.Key)
		}
	}
	f.parent = make([]int, len(f.classes))
	for c, id := range f.classes {
		f.parent[c] = -1
		if pid := labels[pos[id]].ParentID; pid != nil {
			f.parent[c] = classOf[*pid]
		}
	}

	itemOf := make(map[int64]int, len(itemIDs))
	for i, id := range itemIDs {
		itemOf[id] = i
	}
	labOf := map[int64]int{}
	v := &agreement.Votes{NumItems: len(itemIDs), NumClasses: len(f.classes)}
	f.seen = make([]int, len(itemIDs))
	for i := range vc.Len() {
		item, ok := itemOf[vc.Item[i]]
		if !ok {
			continue // an item added after the item list was read
		}
		l, ok := labOf[vc.Labeller[i]]
		if !ok {
			l = len(f.labIDs)
			labOf[vc.Labeller[i]] = l
			f.labIDs = append(f.labIDs, vc.Labeller[i])
		}
		v.Item = append(v.Item, int32(item))
		v.Labeller = append(v.Labeller, int32(l))
		v.Label = append(v.Label, int32(classOf[vc.Label[i]]))
		v.Seconds = append(v.Seconds, vc.Seconds[i])
		f.at = append(f.at, vc.At[i])
		f.seen[item]++
	}
	v.NumLabellers = len(f.labIDs)
	f.votes = v
	for item, label := range gold {
		f.goldItems[item] = true
		if i, ok := itemOf[item]; ok {
			f.gold[i] = classOf[label]
		}
	}
	return f, nil
}

// refit is RefitProject's work, run under the project lock.
func (s *Server) refit(ctx context.Context, projectID int64) error {
	start := s.now()
	f, err := s.loadFit(ctx, projectID)
	if err != nil {
		return err
	}
	if f.votes.Len() == 0 {
		return nil
	}
	ds, err := agreement.DawidSkene(f.votes, agreement.DawidSkeneOptions{Fixed: f.gold})
	if err != nil {
		return fmt.Errorf("fit: %w", err)
	}
	p := f.project.Policy
	pol := agreement.VotePolicy{MinVotes: p.MinVotes, MaxVotes: p.MaxVotes, Target: p.ConfidenceTarget}
	avg := agreement.AverageConfusion(ds)
	plans, err := pol.Plan(&ds.Consensus, avg)
	if err != nil {
		return fmt.Errorf("plan: %w", err)
	}
	hier, err := agreement.NewHierarchy(f.parent)
	if err != nil {
		return fmt.Errorf("label tree: %w", err)
	}
	rows := make([]store.ItemPlanRow, 0, len(f.itemIDs))
	finished, finishedVotes := 0, 0
	for i, id := range f.itemIDs {
		if f.goldItems[id] {
			continue
		}
		pl := plans[i]
		row := store.ItemPlanRow{ItemID: id, SeenVotes: f.seen[i]}
		if f.seen[i] == 0 {
			row.Status, row.VotesNeeded, row.Priority = "unstarted", max(pl.MoreVotes, p.MinVotes, 1), priorityOf(pl)
			rows = append(rows, row)
			continue
		}
		post := ds.PosteriorOf(i)
		c := sparsePosterior(f.classes, post, int(ds.Label[i]))
		c.Method, c.VoteCount = store.MethodDS, f.seen[i]
		if rc, mass := hier.RollUp(post, p.ConfidenceTarget); rc >= 0 {
			c.RollupLabelID, c.RollupConfidence = &f.classes[rc], &mass
		}
		u := planUpdate(pl, c)
		row.Status, row.VotesNeeded, row.Priority, row.Consensus = u.Status, u.VotesNeeded, u.Priority, u.Consensus
		if pl.Status == agreement.StatusDone {
			finished++
			finishedVotes += f.seen[i]
		}
		rows = append(rows, row)
	}
	if _, err := s.store.WriteItemPlans(ctx, projectID, rows); err != nil {
		return err
	}
	reports, err := agreement.Reliability(f.votes, ds, f.gold, agreement.ReliabilityOptions{})
	if err != nil {
		return fmt.Errorf("reliability: %w", err)
	}
	if err := s.saveLabellers(ctx, f, ds, reports); err != nil {
		return err
	}
	sum, err := s.summarize(ctx, f, ds, hier)
	if err != nil {
		return err
	}
	sum.FittedAt = start
	sum.Iterations = ds.Iterations
	sum.FinishedItems, sum.FinishedVotes, sum.FixedVotesPerItem = finished, finishedVotes, p.MaxVotes
	sum.ByLabel = workByLabel(f, rows)
	sum.FitMillis = int(s.now().Sub(start).Milliseconds())
	if err := s.store.SaveProjectSummary(ctx, projectID, int64(f.votes.Len()), sum); err != nil {
		return err
	}
	return s.store.SaveVoteCounts(ctx, projectID, f.counts)
}

// countVotes counts the votes created before vc.CountUntil per labeller and
// per hour, for the progress and cost pages. Votes created later are left
// to the pages, which count them from the votes table.
func countVotes(vc *store.VoteColumns) store.VoteCounts {
	until := vc.CountUntil
	out := store.VoteCounts{Until: until}
	from := store.VoteHoursFrom(until)
	per := map[int64]*store.LabellerCount{}
	perHour := map[int64]int{} // unix hour -> votes
	add := func(labeller int64, secs float64, at time.Time, cantTell bool) {
		if !at.Before(until) {
			return
		}
		l := per[labeller]
		if l == nil {
			l = &store.LabellerCount{UserID: labeller}
			per[labeller] = l
		}
		l.Votes++
		l.Seconds += secs
		if cantTell {
			l.CantTell++
		}
		if at.After(l.LastVote) {
			l.LastVote = at
		}
		if !at.Before(from) {
			perHour[at.Unix()/3600]++
		}
	}
	for i := range vc.Len() {
		add(vc.Labeller[i], vc.Seconds[i], vc.At[i], false)
	}
	ct := &vc.CantTell
	for i := range ct.Labeller {
		add(ct.Labeller[i], ct.Seconds[i], ct.At[i], true)
	}
	for _, l := range per {
		out.Labellers = append(out.Labellers, *l)
	}
	slices.SortFunc(out.Labellers, func(a, b store.LabellerCount) int { return cmp.Compare(a.UserID, b.UserID) })
	for h, n := range perHour {
		out.Hours = append(out.Hours, store.HourCount{Hour: time.Unix(h*3600, 0).UTC(), Votes: n})
	}
	slices.SortFunc(out.Hours, func(a, b store.HourCount) int { return a.Hour.Compare(b.Hour) })
	return out
}

// workByLabel groups the items the fit leaves done by consensus label, in
// key order: the plans' done items with their consensus, and the items
// with a known answer (always done) under that answer.
func workByLabel(f *fitData, rows []store.ItemPlanRow) []store.LabelWork {
	byID := map[int64]*store.LabelWork{}
	add := func(labelID int64, votes int) {
		w := byID[labelID]
		if w == nil {
			w = &store.LabelWork{}
			byID[labelID] = w
		}
		w.Items++
		w.Votes += votes
	}
	for _, r := range rows {
		if r.Status == agreement.StatusDone.String() && r.Consensus != nil && r.Consensus.LabelID != nil {
			add(*r.Consensus.LabelID, r.SeenVotes)
		}
	}
	for i, id := range f.itemIDs {
		if c, ok := f.gold[i]; ok && f.goldItems[id] {
			add(f.classes[c], f.seen[i])
		}
	}
	out := make([]store.LabelWork, 0, len(byID))
	for _, l := range f.labels {
		if w := byID[l.ID]; w != nil {
			w.Key, w.Name = l.Key, l.Name
			out = append(out, *w)
		}
	}
	slices.SortFunc(out, func(a, b store.LabelWork) int { return cmp.Compare(a.Key, b.Key) })
	return out
}

// saveLabellers stores each labeller's figures and pauses those whose
// gold accuracy is clearly below the floor: the upper end of its Wilson
// interval under it. Their votes stay; a lead decides what happens next.
func (s *Server) saveLabellers(ctx context.Context, f *fitData, ds *agreement.DawidSkeneResult, reports []agreement.LabellerReport) error {
	k := len(f.classes)
	stats := make([]store.LabellerStats, len(reports))
	var counts [][][]float64
	if k <= maxModelClasses {
		counts = make([][][]float64, len(f.labIDs))
		for l := range counts {
			counts[l] = make([][]float64, k)
			for i := range counts[l] {
				counts[l][i] = make([]float64, k)
			}
		}
		for v := range f.votes.Len() {
			if c := ds.Label[f.votes.Item[v]]; c >= 0 {
				counts[f.votes.Labeller[v]][c][f.votes.Label[v]]++
			}
		}
	}
	floor := f.project.Policy.AccuracyFloor
	marks, err := s.store.GoldMarks(ctx, f.project.ID)
	if err != nil {
		return err
	}
	for i, r := range reports {
		st := store.LabellerStats{UserID: f.labIDs[r.Labeller], LabellerFigures: store.LabellerFigures{Votes: r.Votes,
			MedianSeconds: finite(r.MedianSeconds), Accuracy: finite(r.EstimatedAccuracy),
			GoldCorrect: r.GoldCorrect, GoldTotal: r.GoldVotes, GoldLow: finite(r.GoldLo), GoldHigh: finite(r.GoldHi),
			Agreement: finite(r.ConsensusAgreement), Flags: []string{}}}
		if r.Flags != 0 {
			st.Flags = strings.Split(r.Flags.String(), ",")
		}
		if counts != nil {
			st.Model = &store.LabellerModel{Labels: f.keys, Counts: counts[r.Labeller], Classes: f.classes,
				Prior: ds.Prior, Matrix: slices.Clone(ds.ConfusionOf(r.Labeller))}
		}
		stats[i] = st
		if reason := pauseReason(r, marks[st.UserID], floor, s.now()); reason != "" {
			paused, err := s.store.AutoPause(ctx, f.project.ID, st.UserID, reason)
			if err != nil {
				return err
			}
			if paused {
				s.log.Info("engine: labeller paused below the accuracy floor", "project", f.project.ID, "user", st.UserID)
			}
		}
	}
	return s.store.SaveLabellerStats(ctx, f.project.ID, stats)
}

// pauseReason says why a labeller is paused automatically, or "" when
// they are not: the upper end of the Wilson interval of their gold
// accuracy lies below the floor. Only gold answers given after mark (their
// figures when a lead last set their status) count, so a lead who resumes
// a labeller is not overruled on the evidence they already weighed.
func pauseReason(r agreement.LabellerReport, mark store.GoldMark, floor float64, now time.Time) string {
	right, seen := r.GoldCorrect-mark.Correct, r.GoldVotes-mark.Total
	if seen <= 0 || right < 0 {
		return ""
	}
	lo, hi := r.GoldLo, r.GoldHi
	since := ""
	if mark.Total > 0 {
		lo, hi = agreement.WilsonInterval(right, seen, agreement.Z95) // as the fit's figures
		since = " since your lead last set your status"
	}
	if !(hi < floor) {
		return ""
	}
	return fmt.Sprintf("Paused automatically on %s: %d of %d gold items right%s; the 95%% interval %.2f to %.2f lies below the project's floor of %.2f. Your votes are kept. Your lead will review this with you and decide.",
		now.UTC().Format("2006-01-02"), right, seen, since, lo, hi, floor)
}

// finite returns nil for NaN and infinities, which JSON and the pages
// show as "not known yet".
func finite(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}
