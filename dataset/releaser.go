package dataset

import (
	"context"
	"fmt"
	"strconv"
	"strings"

	"github.com/concord-labs/concord/store"
)

// Releaser cuts releases of a project from the database. The CLI and the
// lead pages share it; either writes the result with Release.WriteDir or
// streams it with Release.WriteTarGz.
type Releaser struct {
	Store *store.Store
}

// Input loads everything a release of the project is computed from: its
// items with consensus and lead decisions, the taxonomy, the splits of
// earlier releases (of any seed and split), the vote policy,
// agreement figures and cost.
func (r *Releaser) Input(ctx context.Context, projectID int64, p ReleaseParams) (ReleaseInput, error) {
	s := r.Store
	proj, err := s.ProjectByID(ctx, projectID)
	if err != nil {
		return ReleaseInput{}, err
	}
	labels, err := s.Labels(ctx, projectID)
	if err != nil {
		return ReleaseInput{}, err
	}
	cands, err := s.ReleaseCandidates(ctx, projectID)
	if err != nil {
		return ReleaseInput{}, err
	}
	prior, err := s.PriorSplits(ctx, projectID)
	if err != nil {
		return ReleaseInput{}, err
	}
	summary, err := s.AgreementSummary(ctx, projectID)
	if err != nil {
		return ReleaseInput{}, err
	}
	votes, seconds, err := s.VoteTotals(ctx, projectID)
	if err != nil {
		return ReleaseInput{}, err
	}
	in := ReleaseInput{Params: p, Project: proj.Name, Agreement: summary, Pins: make(map[int64]Split, len(prior))}
	for _, l := range labels {
		n := TaxNode{ID: l.ID, Key: l.Key, Name: l.Name, Depth: l.Depth, IsLeaf: l.IsLeaf}
		if l.ParentID != nil {
			n.ParentID = *l.ParentID
		}
		in.Taxonomy = append(in.Taxonomy, n)
	}
	for id, name := range prior {
		sp, err := ParseSplitName(name)
		if err != nil {
			return ReleaseInput{}, fmt.Errorf("earlier release, item %d: %w", id, err)
		}
		in.Pins[id] = sp
	}
	in.Items = make([]Candidate, len(cands))
	for i, c := range cands {
		in.Items[i] = Candidate{ID: c.ID, SHA256: c.SHA256, MediaType: c.MediaType, ClusterID: c.ClusterID,
			GroupKey: c.GroupKey, Votes: c.Votes, Vote: Vote{LabelID: c.LabelID, Confidence: c.Confidence,
				RollupLabelID: c.RollupLabelID, RollupConfidence: c.RollupConfidence,
				PosteriorLabels: c.PosteriorLabels, Posterior: c.Posterior, LeadLabelID: c.LeadLabelID}}
	}
	pol := proj.Policy
	in.Policy = map[string]any{"min_votes": pol.MinVotes, "max_votes": pol.MaxVotes,
		"confidence_target": pol.ConfidenceTarget, "gold_rate": pol.GoldRate}
	if votes > 0 {
		in.Cost = costText(proj.Pay, votes, seconds)
	}
	return in, nil
}

// costText is what the votes cost under the project's pay model, before
// any minimum-pay top-up (which the pay report works out per labeller).
func costText(pay store.PayModel, votes int64, seconds float64) string {
	hours := seconds / 3600
	switch pay.Model {
	case store.PayPerHour:
		return fmt.Sprintf("%.2f %s for %d votes (%.1f hours at %.2f %s an hour)", hours*pay.Rate, pay.Currency, votes, hours, pay.Rate, pay.Currency)
	default:
		return fmt.Sprintf("%.2f %s for %d votes at %g %s a vote (%.1f hours of labelling)", float64(votes)*pay.Rate, pay.Currency, votes, pay.Rate, pay.Currency, hours)
	}
}

// Create computes a release and records it (and its items) in one
// transaction. The name must be new for the project.
func (r *Releaser) Create(ctx context.Context, projectID int64, p ReleaseParams, createdBy *int64) (*Release, store.Release, error) {
	if err := p.Validate(); err != nil {
		return nil, store.Release{}, err
	}
	in, err := r.Input(ctx, projectID, p)
	if err != nil {
		return nil, store.Release{}, err
	}
	rel, err := BuildRelease(in)
	if err != nil {
		return nil, store.Release{}, err
	}
	rec, err := r.Record(ctx, projectID, p, rel, createdBy)
	if err != nil {
		return nil, store.Release{}, err
	}
	return rel, rec, nil
}

// Record writes a computed release and its items to the database in one
// transaction, with release.json as issued and the taxonomy it was cut
// with, so that Load rebuilds every file byte for byte. The name must be
// new for the project.
func (r *Releaser) Record(ctx context.Context, projectID int64, p ReleaseParams, rel *Release, createdBy *int64) (store.Release, error) {
	tax, err := marshalTaxonomy(rel.Taxonomy)
	if err != nil {
		return store.Release{}, fmt.Errorf("record release %q: %w", p.Name, err)
	}
	items := make([]store.ReleaseItem, len(rel.Rows))
	for i, row := range rel.Rows {
		items[i] = store.ReleaseItem{ItemID: row.Item, Split: row.Split.String(), LabelKey: row.Label,
			Confidence: row.Confidence, Votes: row.Votes, GroupKey: strconv.FormatInt(row.Group, 10)}
	}
	var level *int
	if p.Level != LevelLeaf {
		level = &p.Level
	}
	return r.Store.CreateRelease(ctx, store.Release{ProjectID: projectID, Name: p.Name, Seed: p.Seed,
		SplitTrain: p.Split[0], SplitVal: p.Split[1], SplitTest: p.Split[2], MinConfidence: p.MinConfidence,
		Level: level, Formats: strings.Join(p.Formats, ","), ManifestSHA256: rel.ManifestSHA256,
		Card: string(rel.Files[CardFile]), ReleaseJSON: rel.Files[ReleaseJSON], Taxonomy: tax, CreatedBy: createdBy}, items)
}
