package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"
)

// ProjectSummary is the agreement picture of a project as of the engine's
// last fit. The engine loop writes it; the lead pages only read it, so a
// page never scans a million votes. Undefined figures are nil.
type ProjectSummary struct {
	FittedAt   time.Time `json:"fitted_at"`
	Method     string    `json:"method"` // "ds" or "mv"
	Items      int       `json:"items"`  // items with at least one vote
	Votes      int       `json:"votes"`
	Labellers  int       `json:"labellers"`
	FitMillis  int       `json:"fit_millis"`
	Iterations int       `json:"iterations"`

	Fleiss        Estimate            `json:"fleiss"`
	FleissSkipped int                 `json:"fleiss_skipped"` // items with fewer than two votes
	Alpha         Estimate            `json:"alpha"`
	KappaByLabel  map[string]*float64 `json:"kappa_by_label"` // label key -> Fleiss' per-category kappa
	// Confusion[i][j] counts individual votes for label Labels[j] on items
	// whose consensus is Labels[i] (leaves, in taxonomy order).
	Labels    []string     `json:"labels"`
	Confusion [][]int      `json:"confusion"`
	ByDepth   []DepthStats `json:"by_depth"`
	Pairs     []PairStats  `json:"pairs"`
	OverTime  []TimeStats  `json:"over_time"`
	// Savings compares the adaptive policy's votes with a fixed number of
	// votes per item (the policy's maximum) on the items finished so far.
	FinishedItems     int `json:"finished_items"`
	FinishedVotes     int `json:"finished_votes"`
	FixedVotesPerItem int `json:"fixed_votes_per_item"`
}

// Estimate is a statistic with its bootstrap interval and plain-words band.
type Estimate struct {
	Value      *float64 `json:"value"`
	Low        *float64 `json:"low"`
	High       *float64 `json:"high"`
	Level      float64  `json:"level"`
	Band       string   `json:"band"`
	BandSource string   `json:"band_source"`
}

// DepthStats is agreement with every vote rolled up to one taxonomy depth.
type DepthStats struct {
	Depth  int      `json:"depth"`
	Labels int      `json:"labels"`
	Fleiss *float64 `json:"fleiss"`
	Alpha  *float64 `json:"alpha"`
}

// PairStats is Cohen's kappa between two of the most active labellers.
type PairStats struct {
	A     string   `json:"a"` // logins
	B     string   `json:"b"`
	Items int      `json:"items"`
	Kappa *float64 `json:"kappa"`
	SE    *float64 `json:"se"`
}

// TimeStats is agreement among the votes of one period.
type TimeStats struct {
	Start  time.Time `json:"start"`
	Votes  int       `json:"votes"`
	Fleiss *float64  `json:"fleiss"`
}

// SaveProjectSummary stores the summary of a fit.
func (s *Store) SaveProjectSummary(ctx context.Context, projectID int64, votesAtFit int64, sum ProjectSummary) error {
	b, err := json.Marshal(sum)
	if err != nil {
		return fmt.Errorf("encode summary of project %d: %w", projectID, err)
	}
	_, err = s.pool.Exec(ctx, `
		INSERT INTO project_stats (project_id, votes_at_fit, fitted_at, fit_millis, summary)
		VALUES ($1, $2, $3, $4, $5)
		ON CONFLICT (project_id) DO UPDATE SET votes_at_fit = excluded.votes_at_fit,
			fitted_at = excluded.fitted_at, fit_millis = excluded.fit_millis, summary = excluded.summary`,
		projectID, votesAtFit, sum.FittedAt, sum.FitMillis, b)
	if err != nil {
		return fmt.Errorf("save summary of project %d: %w", projectID, mapErr(err))
	}
	return nil
}

// ProjectSummary returns the last fit's summary; ErrNotFound before the first fit.
func (s *Store) ProjectSummary(ctx context.Context, projectID int64) (ProjectSummary, int64, error) {
	var b []byte
	var votesAtFit int64
	err := s.pool.QueryRow(ctx, `SELECT summary, votes_at_fit FROM project_stats WHERE project_id = $1`, projectID).Scan(&b, &votesAtFit)
	if err != nil {
		return ProjectSummary{}, 0, fmt.Errorf("summary of project %d: %w", projectID, mapErr(err))
	}
	var sum ProjectSummary
	if err := json.Unmarshal(b, &sum); err != nil {
		return ProjectSummary{}, 0, fmt.Errorf("decode summary of project %d: %w", projectID, err)
	}
	return sum, votesAtFit, nil
}
