package web

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"sync"
	"time"

	"github.com/concord-labs/concord/agreement"
	"github.com/concord-labs/concord/store"
)

// ErrRefitBusy means another session (this process or another one) holds
// the project's refit lock; the refit was skipped, not failed.
var ErrRefitBusy = errors.New("refit skipped: another process is refitting this project")

// Engine schedule defaults: a project is refitted once both enough time and
// enough new votes have passed ("every few seconds or N votes, whichever
// comes later"), and at the latest engineStaleAfter intervals after a vote,
// so a quiet project still settles.
const (
	DefaultEngineInterval = 5 * time.Second
	DefaultEngineVotes    = 200
	engineStaleAfter      = 12
)

// defaultAccuracy is the one-coin accuracy assumed for a labeller the last
// fit has not seen yet. It is Concord's choice (a middling labeller), not a
// published value.
const defaultAccuracy = 0.7

// engine is the server's agreement engine: the refit loop's schedule and a
// cache of each project's last fit for the vote path. The cache is derived
// from the database and checked against project_stats.fitted_at on every
// vote, so several processes never disagree for longer than one vote.
type engine struct {
	Interval time.Duration
	MinVotes int64

	mu      sync.Mutex
	models  map[int64]*fitModel
	loading map[int64]bool
}

func newEngine(interval time.Duration, minVotes int64) *engine {
	if interval <= 0 {
		interval = DefaultEngineInterval
	}
	if minVotes <= 0 {
		minVotes = DefaultEngineVotes
	}
	return &engine{Interval: interval, MinVotes: minVotes, models: map[int64]*fitModel{}}
}

func (s *Server) engine() *engine { return s.eng }

// SetEngineSchedule changes how often the refit loop runs (for serve flags
// and tests); zero values keep the defaults.
func (s *Server) SetEngineSchedule(interval time.Duration, minVotes int64) {
	e := s.engine()
	if interval > 0 {
		e.Interval = interval
	}
	if minVotes > 0 {
		e.MinVotes = minVotes
	}
}

// fitModel is a project's last fit as the vote path uses it.
type fitModel struct {
	fittedAt time.Time
	k        int
	index    map[int64]int // label id -> class
	classes  []int64
	prior    []float64
	avg      []float64
	matrix   map[int64][]float64 // labeller -> K x K, full or one-coin
}

// model returns the cached fit of a project, or nil before it is loaded.
// It never waits for the database: it runs inside the vote transaction,
// which already holds a pool connection, and loading the model there would
// need a second one — with every connection held by a vote waiting for
// another, the pool starves. When the cache is older than fittedAt it
// starts one background reload and answers with what it has (an older fit,
// or nil and majority vote); the next refit corrects any item decided so.
func (e *engine) model(st *store.Store, projectID int64, fittedAt time.Time) *fitModel {
	e.mu.Lock()
	defer e.mu.Unlock()
	m := e.models[projectID]
	if (m == nil || !m.fittedAt.Equal(fittedAt)) && !e.loading[projectID] {
		if e.loading == nil {
			e.loading = map[int64]bool{}
		}
		e.loading[projectID] = true
		go e.reload(st, projectID)
	}
	return m
}

// modelFor returns the fit the vote path should use for iv. When the
// cache is older than the fit iv saw, it loads the fit through iv.LoadModel,
// on the vote transaction's own connection (no second pooled connection,
// so no starvation), and the vote is decided with the current fit; without
// a loader it falls back to model's background reload.
func (e *engine) modelFor(st *store.Store, projectID int64, iv store.ItemVotes) *fitModel {
	if iv.LoadModel == nil {
		return e.model(st, projectID, iv.FittedAt)
	}
	e.mu.Lock()
	m := e.models[projectID]
	e.mu.Unlock()
	if m != nil && m.fittedAt.Equal(iv.FittedAt) {
		return m
	}
	pm, err := iv.LoadModel()
	if err != nil {
		return m
	}
	m = buildFitModel(pm)
	e.mu.Lock()
	e.models[projectID] = m
	e.mu.Unlock()
	return m
}

// reload loads a project's fit into the cache on a connection of its own.
func (e *engine) reload(st *store.Store, projectID int64) {
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	pm, err := st.ProjectModel(ctx, projectID)
	e.mu.Lock()
	defer e.mu.Unlock()
	delete(e.loading, projectID)
	if err == nil {
		e.models[projectID] = buildFitModel(pm)
	}
}

// loadModel loads a project's fit into the cache and waits for it (for
// refits and tests, never inside a transaction).
func (e *engine) loadModel(ctx context.Context, st *store.Store, projectID int64) error {
	pm, err := st.ProjectModel(ctx, projectID)
	if err != nil {
		return err
	}
	e.mu.Lock()
	e.models[projectID] = buildFitModel(pm)
	e.mu.Unlock()
	return nil
}

func buildFitModel(pm store.ProjectModel) *fitModel {
	m := &fitModel{fittedAt: pm.FittedAt, matrix: map[int64][]float64{}}
	for _, lm := range pm.Models {
		if m.classes == nil && len(lm.Classes) > 0 {
			m.classes, m.prior = lm.Classes, lm.Prior
		}
	}
	m.k = len(m.classes)
	if m.k == 0 {
		return m
	}
	m.index = make(map[int64]int, m.k)
	for i, c := range m.classes {
		m.index[c] = i
	}
	m.avg = make([]float64, m.k*m.k)
	total := 0.0
	for l, lm := range pm.Models {
		if len(lm.Matrix) != m.k*m.k || !slices.Equal(lm.Classes, m.classes) {
			continue
		}
		m.matrix[l] = lm.Matrix
		w := float64(max(pm.Votes[l], 1))
		total += w
		for i, x := range lm.Matrix {
			m.avg[i] += w * x
		}
	}
	if total == 0 {
		m.avg = oneCoin(m.k, defaultAccuracy)
	} else {
		for i := range m.avg {
			m.avg[i] /= total
		}
	}
	return m
}

// oneCoin is a K x K matrix for a labeller right with chance acc and
// otherwise wrong uniformly.
func oneCoin(k int, acc float64) []float64 {
	out := make([]float64, k*k)
	off := (1 - acc) / float64(max(k-1, 1))
	for t := range k {
		for j := range k {
			out[t*k+j] = off
		}
		out[t*k+t] = acc
	}
	if k == 1 {
		out[0] = 1
	}
	return out
}

// VoteDecider is the consensus update the vote handlers use, for callers
// that record votes without HTTP (the demo's simulated crowd).
func (s *Server) VoteDecider(p *store.Project) store.Decider { return s.decider(p) }

// decider returns the vote path's Decider for a project: the item's
// posterior from the last fit's confusion matrices and priors, or majority
// vote before the first fit, then its status under the vote policy.
func (s *Server) decider(p *store.Project) store.Decider {
	return func(ctx context.Context, iv store.ItemVotes) (store.ItemUpdate, error) {
		pol := agreement.VotePolicy{MinVotes: p.Policy.MinVotes, MaxVotes: p.Policy.MaxVotes, Target: p.Policy.ConfidenceTarget}
		if iv.VoteCount == 0 {
			return store.ItemUpdate{Status: "unstarted", VotesNeeded: max(p.Policy.MinVotes, 1)}, nil
		}
		if !iv.FittedAt.IsZero() {
			if m := s.engine().modelFor(s.store, p.ID, iv); m != nil && m.k > 0 {
				if u, ok := m.decide(iv, pol); ok {
					return u, nil
				}
			}
		}
		return majorityDecision(iv, pol), nil
	}
}

// decide computes the item's Dawid-Skene posterior with the fitted
// matrices held fixed. ok is false when a vote uses a label the fit did not
// know, and majority vote must do.
func (m *fitModel) decide(iv store.ItemVotes, pol agreement.VotePolicy) (store.ItemUpdate, bool) {
	confs := make([][]float64, len(iv.Labels))
	labels := make([]int, len(iv.Labels))
	for i, label := range iv.Labels {
		j, ok := m.index[label]
		if !ok {
			return store.ItemUpdate{}, false
		}
		labels[i] = j
		if confs[i] = m.matrix[iv.Labellers[i]]; confs[i] == nil {
			confs[i] = m.avg
		}
	}
	post, best := agreement.ItemPosterior(m.prior, confs, labels)
	c := &agreement.Consensus{NumItems: 1, NumClasses: m.k, Posterior: post, Votes: []int32{int32(iv.VoteCount)}}
	c.Label, c.Confidence = []int32{int32(best)}, []float64{post[best]}
	plans, err := pol.Plan(c, m.avg)
	if err != nil {
		return store.ItemUpdate{}, false
	}
	row := sparsePosterior(m.classes, post, best)
	row.Method, row.VoteCount = store.MethodDS, iv.VoteCount
	return planUpdate(plans[0], row), true
}

// majorityDecision is the rule before the first fit: the top share of the
// votes stands in for confidence, so an item is done once MinVotes votes
// agree to the target share (unanimous at the default 0.95).
func majorityDecision(iv store.ItemVotes, pol agreement.VotePolicy) store.ItemUpdate {
	counts := map[int64]int{}
	var order []int64
	for _, l := range iv.Labels {
		if counts[l] == 0 {
			order = append(order, l)
		}
		counts[l]++
	}
	slices.Sort(order)
	post := make([]float64, len(order))
	top, tied := 0, false
	for i, l := range order {
		post[i] = float64(counts[l]) / float64(iv.VoteCount)
		if counts[l] > counts[order[top]] {
			top, tied = i, false
		} else if i != top && counts[l] == counts[order[top]] {
			tied = true
		}
	}
	row := &store.ConsensusRow{Confidence: post[top], Method: store.MethodMajority, VoteCount: iv.VoteCount,
		Tied: tied, PosteriorLabels: order, Posterior: post}
	if !tied {
		row.LabelID = &order[top]
	}
	pl := agreement.ItemPlan{Votes: iv.VoteCount, Confidence: post[top]}
	switch {
	case pl.Votes >= pol.MinVotes && pl.Confidence >= pol.Target && !tied:
		pl.Status = agreement.StatusDone
	case pl.Votes >= pol.MaxVotes:
		pl.Status = agreement.StatusReview
	default:
		pl.Status = agreement.StatusNeedsVotes
		pl.MoreVotes = max(pol.MinVotes-pl.Votes, 1)
	}
	return planUpdate(pl, row)
}

// planUpdate turns a plan into the item's stored state. The priority is
// the expected gain of one more vote, with lower confidence breaking ties
// as agreement.Queue does.
func planUpdate(pl agreement.ItemPlan, row *store.ConsensusRow) store.ItemUpdate {
	u := store.ItemUpdate{Status: pl.Status.String(), Consensus: row}
	if pl.Status == agreement.StatusNeedsVotes {
		u.VotesNeeded = max(pl.MoreVotes, 1)
		u.Priority = priorityOf(pl)
	}
	return u
}

func priorityOf(pl agreement.ItemPlan) float64 { return pl.Gain + 1e-3*(1-pl.Confidence) }

// sparsePosterior keeps the classes with a posterior worth storing.
func sparsePosterior(classes []int64, post []float64, best int) *store.ConsensusRow {
	row := &store.ConsensusRow{LabelID: &classes[best], Confidence: post[best]}
	for i, p := range post {
		if p >= 1e-4 {
			row.PosteriorLabels = append(row.PosteriorLabels, classes[i])
			row.Posterior = append(row.Posterior, p)
		}
	}
	return row
}

// startEngine runs the refit loop until ctx ends and returns a channel
// closed when it has stopped.
func (s *Server) startEngine(ctx context.Context) <-chan struct{} {
	done := make(chan struct{})
	go func() {
		defer close(done)
		e := s.engine()
		t := time.NewTicker(e.Interval)
		defer t.Stop()
		for {
			select {
			case <-ctx.Done():
				return
			case <-t.C:
			}
			s.refitDue(ctx)
		}
	}()
	return done
}

// waitFor blocks until ch is closed.
func waitFor(ch <-chan struct{}) { <-ch }

// refitDue refits every project whose schedule says so.
func (s *Server) refitDue(ctx context.Context) {
	e := s.engine()
	states, err := s.store.FitStates(ctx)
	if err != nil {
		if ctx.Err() == nil {
			s.log.Warn("engine: list projects", "err", err)
		}
		return
	}
	for _, st := range states {
		if !e.due(st, s.now()) {
			continue
		}
		if err := s.RefitProject(ctx, st.ProjectID); err != nil && !errors.Is(err, ErrRefitBusy) && ctx.Err() == nil {
			s.log.Error("engine: refit", "project", st.ProjectID, "err", err)
		}
	}
}

func (e *engine) due(st store.FitState, now time.Time) bool {
	if st.NewVotes == 0 {
		return false
	}
	if st.FittedAt == nil {
		return true
	}
	age := now.Sub(*st.FittedAt)
	return age >= e.Interval && st.NewVotes >= e.MinVotes || age >= engineStaleAfter*e.Interval
}

// RefitProject fits Dawid-Skene to every vote of the project with known
// answers held fixed, and writes the items' consensus, status, votes needed
// and priority, the labellers' figures (pausing those clearly below the
// accuracy floor) and the project summary. Whichever process holds the
// project's advisory lock does the work; a second caller gets ErrRefitBusy.
// Voting goes on meanwhile: items that got a vote during the fit keep the
// vote path's figures.
func (s *Server) RefitProject(ctx context.Context, projectID int64) error {
	ran, err := s.store.WithProjectLock(ctx, projectID, func(ctx context.Context) error {
		return s.refit(ctx, projectID)
	})
	if err != nil {
		return fmt.Errorf("refit project %d: %w", projectID, err)
	}
	if !ran {
		return ErrRefitBusy
	}
	// Warm the vote path's cache now, so the next votes use this fit.
	if err := s.engine().loadModel(ctx, s.store, projectID); err != nil && !errors.Is(err, store.ErrNotFound) {
		return fmt.Errorf("refit project %d: load the new fit: %w", projectID, err)
	}
	return nil
}

func idName(id int64) string { return strconv.FormatInt(id, 10) }
