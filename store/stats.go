package store

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
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
	// ByLabel is the items done at the fit grouped by consensus label (a
	// known answer for gold and lead-decided items), in key order, for the
	// cost page. Nil in summaries written before it was kept.
	ByLabel []LabelWork `json:"by_label"`
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

// VoteHoursKept is how many hours of votes per hour a count keeps: the
// progress page's 7 days.
const VoteHoursKept = 7 * 24

// VoteCounts is what a refit counted of a project's votes for the lead
// pages: every vote created before Until, "can't tell" included. The pages
// add the votes created since Until from the votes table, a short range
// of its (project_id, created_at) index.
type VoteCounts struct {
	Until     time.Time
	Labellers []LabellerCount
	// Hours holds the hours with votes among the VoteHoursKept hours that
	// end with the one containing Until (see VoteHoursFrom), oldest first.
	Hours []HourCount
}

// LabellerCount is one labeller's votes in a count.
type LabellerCount struct {
	UserID   int64
	Votes    int // all, "can't tell" included: all are paid
	CantTell int
	Seconds  float64 // recorded seconds of those votes
	LastVote time.Time
}

// VoteHoursFrom is the first hour a count up to until keeps votes per
// hour for.
func VoteHoursFrom(until time.Time) time.Time {
	return until.UTC().Truncate(time.Hour).Add(-(VoteHoursKept - 1) * time.Hour)
}

// SaveVoteCounts stores a count in one transaction, so a page reads either
// the old count with its Until or the new one with its own, never a mix.
// The project's summary must have been saved first: Until is kept beside it.
func (s *Store) SaveVoteCounts(ctx context.Context, projectID int64, c VoteCounts) error {
	n := len(c.Labellers)
	users, votes, cantTell := make([]int64, n), make([]int32, n), make([]int32, n)
	secs, last := make([]float64, n), make([]time.Time, n)
	for i, l := range c.Labellers {
		users[i], votes[i], cantTell[i], secs[i], last[i] = l.UserID, int32(l.Votes), int32(l.CantTell), l.Seconds, l.LastVote
	}
	hours, hourVotes := make([]time.Time, len(c.Hours)), make([]int32, len(c.Hours))
	for i, h := range c.Hours {
		hours[i], hourVotes[i] = h.Hour, int32(h.Votes)
	}
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		tag, err := tx.Exec(ctx, `UPDATE project_stats SET counted_until = $2 WHERE project_id = $1`, projectID, c.Until)
		if err != nil {
			return err
		}
		if tag.RowsAffected() != 1 {
			return errors.New("no fit summary to keep the count beside")
		}
		b := &pgx.Batch{}
		b.Queue(`
			INSERT INTO labeller_stats (project_id, user_id, votes_all, cant_tell, seconds_total, last_vote_at)
			SELECT $1, u.id, u.n, u.ct, u.secs, u.last
			FROM unnest($2::bigint[], $3::int[], $4::int[], $5::float8[], $6::timestamptz[]) AS u(id, n, ct, secs, last)
			ON CONFLICT (project_id, user_id) DO UPDATE SET votes_all = excluded.votes_all,
				cant_tell = excluded.cant_tell, seconds_total = excluded.seconds_total, last_vote_at = excluded.last_vote_at`,
			projectID, users, votes, cantTell, secs, last)
		// A labeller whose votes are gone (their items deleted) must not
		// keep an old total beside the new Until.
		b.Queue(`
			UPDATE labeller_stats SET votes_all = 0, cant_tell = 0, seconds_total = 0, last_vote_at = NULL
			WHERE project_id = $1 AND user_id <> ALL($2) AND (votes_all > 0 OR last_vote_at IS NOT NULL)`, projectID, users)
		b.Queue(`DELETE FROM project_vote_hours WHERE project_id = $1`, projectID)
		b.Queue(`INSERT INTO project_vote_hours (project_id, hour, votes) SELECT $1, h, n FROM unnest($2::timestamptz[], $3::int[]) AS u(h, n)`,
			projectID, hours, hourVotes)
		return tx.SendBatch(ctx, b).Close()
	})
	if err != nil {
		return fmt.Errorf("save vote counts of project %d: %w", projectID, mapErr(err))
	}
	return nil
}

// readCounted runs fn in one read-only snapshot with the project's last
// count: until (the zero time before the first count, so "votes since
// until" is every vote) and kept, the first hour whose votes per hour it
// keeps. The snapshot keeps the count's figures and its until together
// when a refit saves a new count meanwhile. The times reach the queries as
// parameters, so the planner sizes the "votes since" scan as the short
// range it is.
func (s *Store) readCounted(ctx context.Context, projectID int64, fn func(tx pgx.Tx, until, kept time.Time) error) error {
	return pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly}, func(tx pgx.Tx) error {
		var until *time.Time
		err := tx.QueryRow(ctx, `SELECT counted_until FROM project_stats WHERE project_id = $1`, projectID).Scan(&until)
		if err != nil && !errors.Is(err, pgx.ErrNoRows) {
			return err
		}
		if until == nil {
			return fn(tx, time.Time{}, time.Time{})
		}
		return fn(tx, *until, VoteHoursFrom(*until))
	})
}
