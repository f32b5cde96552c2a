package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"
)

// Consensus methods as stored.
const (
	MethodMajority = "mv"
	MethodDS       = "ds"
	MethodLead     = "lead"
	MethodGold     = "gold"
)

// ItemVotes is what the store knows about one item when a vote changes it:
// its labelled votes in the order they came, its gold answer (nil if none)
// and when the project was last fitted (zero before the first fit).
type ItemVotes struct {
	ProjectID int64
	ItemID    int64
	Labellers []int64
	Labels    []int64
	GoldLabel *int64
	FittedAt  time.Time
	VoteCount int
	// LoadModel reads the last fit's labeller estimates on the vote's own
	// connection: a Decider must not take a second pooled connection while
	// the vote's transaction holds one, or a busy pool deadlocks.
	LoadModel func() (ProjectModel, error)
}

// ItemUpdate is an item's new state after a vote, decided by the caller
// from the current labeller reliability estimates.
type ItemUpdate struct {
	Status      string
	VotesNeeded int
	Priority    float64
	// Consensus is nil when the item has no labelled votes left.
	Consensus *ConsensusRow
}

// ConsensusRow is one item's consensus as stored.
type ConsensusRow struct {
	ItemID           int64
	LabelID          *int64
	Confidence       float64
	Method           string // mv, ds, lead or gold
	VoteCount        int
	Tied             bool
	RollupLabelID    *int64
	RollupConfidence *float64
	PosteriorLabels  []int64
	Posterior        []float64
}

// Decider turns an item's votes into its new state. It runs inside the
// vote's transaction, so it must be quick and must not write.
type Decider func(ctx context.Context, iv ItemVotes) (ItemUpdate, error)

// itemVotes loads what a Decider needs, after the item row is locked.
func itemVotes(ctx context.Context, q querier, projectID, itemID int64) (ItemVotes, error) {
	iv := ItemVotes{ProjectID: projectID, ItemID: itemID}
	var fitted *time.Time
	err := q.QueryRow(ctx, `
		SELECT (SELECT label_id FROM gold_answers WHERE item_id = $1),
		       (SELECT fitted_at FROM project_stats WHERE project_id = $2),
		       coalesce(array_agg(labeller_id ORDER BY created_at, id), '{}'),
		       coalesce(array_agg(label_id ORDER BY created_at, id), '{}')
		FROM votes WHERE item_id = $1 AND label_id IS NOT NULL`, itemID, projectID).
		Scan(&iv.GoldLabel, &fitted, &iv.Labellers, &iv.Labels)
	if err != nil {
		return ItemVotes{}, err
	}
	if fitted != nil {
		iv.FittedAt = *fitted
	}
	iv.VoteCount = len(iv.Labels)
	iv.LoadModel = func() (ProjectModel, error) { return projectModel(ctx, q, projectID) }
	return iv, nil
}

// itemUpdateSQL is the statement that writes an item's status, vote count
// change and consensus, so a caller can run it or queue it in a batch.
func itemUpdateSQL(projectID, itemID int64, u ItemUpdate, delta int) (string, []any) {
	if u.Consensus == nil {
		return `
			WITH u AS (UPDATE items SET status = $2, votes_needed = $3, priority = $4, vote_count = vote_count + $5 WHERE id = $1)
			DELETE FROM consensus WHERE item_id = $1`, []any{itemID, u.Status, u.VotesNeeded, u.Priority, delta}
	}
	c := u.Consensus
	return `
		WITH u AS (UPDATE items SET status = $12, votes_needed = $13, priority = $14, vote_count = vote_count + $15 WHERE id = $1)
		INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count, tied,
			rollup_label_id, rollup_confidence, posterior_labels, posterior, updated_at)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, now())
		ON CONFLICT (item_id) DO UPDATE SET label_id = excluded.label_id, confidence = excluded.confidence,
			method = excluded.method, vote_count = excluded.vote_count, tied = excluded.tied,
			rollup_label_id = excluded.rollup_label_id, rollup_confidence = excluded.rollup_confidence,
			posterior_labels = excluded.posterior_labels, posterior = excluded.posterior, updated_at = now()`,
		[]any{itemID, projectID, c.LabelID, c.Confidence, c.Method, c.VoteCount, c.Tied, c.RollupLabelID,
			c.RollupConfidence, nonNil(c.PosteriorLabels), nonNilF(c.Posterior), u.Status, u.VotesNeeded, u.Priority, delta}
}

func nonNil(x []int64) []int64 {
	if x == nil {
		return []int64{}
	}
	return x
}

func nonNilF(x []float64) []float64 {
	if x == nil {
		return []float64{}
	}
	return x
}

// LabellerModel is one labeller's fitted confusion matrix over Classes
// (label ids): Matrix[t*K+j] is the chance they vote Classes[j] on an item
// whose true label is Classes[t]. Prior is the fit's class prior.
type LabellerModel struct {
	// Labels and Counts are the lead pages' view (see Confusion): votes
	// for Labels[j] on items whose consensus is Labels[i].
	Labels  []string    `json:"labels"`
	Counts  [][]float64 `json:"counts"`
	Classes []int64     `json:"classes"`
	Prior   []float64   `json:"prior"`
	Matrix  []float64   `json:"matrix"`
}

// ProjectModel is the last fit's reliability estimates, as the vote path
// reads them to update one item's consensus.
type ProjectModel struct {
	FittedAt time.Time
	// Accuracy and Votes per labeller id; Models holds the matrices of
	// the labellers that have one (small taxonomies only).
	Accuracy map[int64]float64
	Votes    map[int64]int
	Models   map[int64]*LabellerModel
}

// ProjectModel loads the labeller estimates of the last fit; ErrNotFound
// before the first fit.
func (s *Store) ProjectModel(ctx context.Context, projectID int64) (ProjectModel, error) {
	return projectModel(ctx, s.pool, projectID)
}

func projectModel(ctx context.Context, q querier, projectID int64) (ProjectModel, error) {
	m := ProjectModel{Accuracy: map[int64]float64{}, Votes: map[int64]int{}, Models: map[int64]*LabellerModel{}}
	err := func() error {
		if err := q.QueryRow(ctx, `SELECT fitted_at FROM project_stats WHERE project_id = $1`, projectID).Scan(&m.FittedAt); err != nil {
			return err
		}
		rows, err := q.Query(ctx, `SELECT user_id, votes, accuracy, confusion FROM labeller_stats WHERE project_id = $1`, projectID)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var id int64
			var n int
			var acc *float64
			var conf []byte
			if err := rows.Scan(&id, &n, &acc, &conf); err != nil {
				return err
			}
			m.Votes[id] = n
			if acc != nil {
				m.Accuracy[id] = *acc
			}
			if len(conf) > 0 && string(conf) != "null" {
				var lm LabellerModel
				if err := json.Unmarshal(conf, &lm); err != nil {
					return fmt.Errorf("confusion of labeller %d: %w", id, err)
				}
				m.Models[id] = &lm
			}
		}
		return rows.Err()
	}()
	if err != nil {
		return ProjectModel{}, fmt.Errorf("labeller model of project %d: %w", projectID, mapErr(err))
	}
	return m, nil
}
