package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
)

// VoteColumns is a project's labelled votes as parallel columns, the
// shape the agreement engine wants, without a struct per vote. CantTell
// holds the "can't tell" votes apart: the fit ignores them, but they are
// paid and count towards the pace.
type VoteColumns struct {
	Item     []int64
	Labeller []int64
	Label    []int64
	Seconds  []float64
	At       []time.Time
	CantTell CantTellColumns
	// CountUntil is a time before which every vote was committed when the
	// votes were read: a vote's created_at is its transaction's start, so
	// a vote begun just before the read may commit after it. Counts kept
	// for the lead pages cover the votes created before CountUntil.
	CountUntil time.Time
}

// CantTellColumns is the "can't tell" votes of a project, as columns.
type CantTellColumns struct {
	Labeller []int64
	Seconds  []float64
	At       []time.Time
}

// Len is the number of labelled votes.
func (v *VoteColumns) Len() int { return len(v.Item) }

// countMargin is how long before reading the votes CountUntil lies: longer
// than any vote transaction lasts, so none created before CountUntil is
// still uncommitted when the votes are read.
const countMargin = time.Minute

// ProjectVotes loads every vote of a project, oldest first: the labelled
// ones as the engine's columns and the "can't tell" ones apart.
func (s *Store) ProjectVotes(ctx context.Context, projectID int64) (VoteColumns, error) {
	var out VoteColumns
	if err := s.pool.QueryRow(ctx, `SELECT now() - make_interval(secs => $1)`, countMargin.Seconds()).Scan(&out.CountUntil); err != nil {
		return out, fmt.Errorf("votes of project %d: %w", projectID, err)
	}
	rows, err := s.pool.Query(ctx, `
		SELECT item_id, labeller_id, label_id, seconds, created_at FROM votes
		WHERE project_id = $1 ORDER BY created_at, id`, projectID)
	if err != nil {
		return out, fmt.Errorf("votes of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var item, labeller int64
	var label pgtype.Int8
	var secs float32
	var at time.Time
	_, err = pgx.ForEachRow(rows, []any{&item, &labeller, &label, &secs, &at}, func() error {
		if !label.Valid {
			ct := &out.CantTell
			ct.Labeller = append(ct.Labeller, labeller)
			ct.Seconds = append(ct.Seconds, float64(secs))
			ct.At = append(ct.At, at)
			return nil
		}
		out.Item = append(out.Item, item)
		out.Labeller = append(out.Labeller, labeller)
		out.Label = append(out.Label, label.Int64)
		out.Seconds = append(out.Seconds, float64(secs))
		out.At = append(out.At, at)
		return nil
	})
	if err != nil {
		return VoteColumns{}, fmt.Errorf("votes of project %d: %w", projectID, err)
	}
	return out, nil
}

// ItemStates lists every item of a project with its stored vote count and
// status, by id.
func (s *Store) ItemStates(ctx context.Context, projectID int64) (ids []int64, voteCounts []int, statuses []string, err error) {
	rows, err := s.pool.Query(ctx, `SELECT id, vote_count, status FROM items WHERE project_id = $1 ORDER BY id`, projectID)
	if err != nil {
		return nil, nil, nil, fmt.Errorf("items of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var id int64
	var n int
	var st string
	_, err = pgx.ForEachRow(rows, []any{&id, &n, &st}, func() error {
		ids, voteCounts, statuses = append(ids, id), append(voteCounts, n), append(statuses, st)
		return nil
	})
	if err != nil {
		return nil, nil, nil, fmt.Errorf("items of project %d: %w", projectID, err)
	}
	return ids, voteCounts, statuses, nil
}

// ItemPlanRow is an item's new status from a fit. SeenVotes is the item's
// vote count the fit saw: a row is written only while the item still has
// that count, so a vote that came in during the fit is not overwritten by
// older figures.
type ItemPlanRow struct {
	ItemID      int64
	SeenVotes   int
	Status      string
	VotesNeeded int
	Priority    float64
	Consensus   *ConsensusRow
}

// writeBatch is the number of rows per statement: each statement commits
// on its own, so item row locks are held for milliseconds, never for a
// whole project.
const writeBatch = 2000

// WriteItemPlans stores a fit's item statuses and consensus in batches.
// It returns how many items changed.
func (s *Store) WriteItemPlans(ctx context.Context, projectID int64, plans []ItemPlanRow) (int, error) {
	changed := 0
	for start := 0; start < len(plans); start += writeBatch {
		part := plans[start:min(start+writeBatch, len(plans))]
		n, err := s.writePlanBatch(ctx, projectID, part)
		if err != nil {
			return changed, fmt.Errorf("write item plans of project %d: %w", projectID, mapErr(err))
		}
		changed += n
	}
	return changed, nil
}

func (s *Store) writePlanBatch(ctx context.Context, projectID int64, part []ItemPlanRow) (int, error) {
	n := len(part)
	ids, seen, needed := make([]int64, n), make([]int32, n), make([]int32, n)
	status, prio := make([]string, n), make([]float64, n)
	var cIDs []int64
	var cSeen, cVotes []int32
	var cLabel, cRollup []*int64
	var cConf []float64
	var cRollConf []*float64
	var cMethod []string
	var cTied []bool
	var cPostLabels, cPost []string
	for i, p := range part {
		ids[i], seen[i], needed[i], status[i], prio[i] = p.ItemID, int32(p.SeenVotes), int32(p.VotesNeeded), p.Status, p.Priority
		if c := p.Consensus; c != nil {
			cIDs, cSeen, cVotes = append(cIDs, p.ItemID), append(cSeen, int32(p.SeenVotes)), append(cVotes, int32(c.VoteCount))
			cLabel, cRollup = append(cLabel, c.LabelID), append(cRollup, c.RollupLabelID)
			cConf, cRollConf = append(cConf, c.Confidence), append(cRollConf, c.RollupConfidence)
			cMethod, cTied = append(cMethod, c.Method), append(cTied, c.Tied)
			// Arrays of unequal length cannot be unnested as one
			// column, so the posteriors travel as JSON text.
			pl, _ := json.Marshal(nonNil(c.PosteriorLabels))
			pp, _ := json.Marshal(nonNilF(c.Posterior))
			cPostLabels, cPost = append(cPostLabels, string(pl)), append(cPost, string(pp))
		}
	}
	tag, err := s.pool.Exec(ctx, `
		UPDATE items i SET status = u.status, votes_needed = u.needed, priority = u.prio
		FROM unnest($2::bigint[], $3::int[], $4::text[], $5::int[], $6::float8[]) AS u(id, seen, status, needed, prio)
		WHERE i.project_id = $1 AND i.id = u.id AND i.vote_count = u.seen
			AND NOT EXISTS (SELECT 1 FROM gold_answers g WHERE g.item_id = i.id)
			AND (i.status, i.votes_needed, i.priority) IS DISTINCT FROM (u.status, u.needed, u.prio)`,
		projectID, ids, seen, status, needed, prio)
	if err != nil {
		return 0, err
	}
	if len(cIDs) == 0 {
		return int(tag.RowsAffected()), nil
	}
	_, err = s.pool.Exec(ctx, `
		INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count, tied,
			rollup_label_id, rollup_confidence, posterior_labels, posterior, updated_at)
		SELECT u.id, $1, u.label, u.conf, u.method, u.votes, u.tied, u.rollup, u.rollconf,
			ARRAY(SELECT jsonb_array_elements_text(u.pl::jsonb)::bigint),
			ARRAY(SELECT jsonb_array_elements_text(u.pp::jsonb)::float8), now()
		FROM unnest($2::bigint[], $3::int[], $4::int[], $5::bigint[], $6::float8[], $7::text[], $8::bool[],
			$9::bigint[], $10::float8[], $11::text[], $12::text[])
			AS u(id, seen, votes, label, conf, method, tied, rollup, rollconf, pl, pp)
		JOIN items i ON i.id = u.id AND i.project_id = $1 AND i.vote_count = u.seen
		WHERE NOT EXISTS (SELECT 1 FROM gold_answers g WHERE g.item_id = u.id)
		ON CONFLICT (item_id) DO UPDATE SET label_id = excluded.label_id, confidence = excluded.confidence,
			method = excluded.method, vote_count = excluded.vote_count, tied = excluded.tied,
			rollup_label_id = excluded.rollup_label_id, rollup_confidence = excluded.rollup_confidence,
			posterior_labels = excluded.posterior_labels, posterior = excluded.posterior, updated_at = now()`,
		projectID, cIDs, cSeen, cVotes, cLabel, cConf, cMethod, cTied, cRollup, cRollConf, cPostLabels, cPost)
	return int(tag.RowsAffected()), err
}

// LabellerFigures are a labeller's reliability figures from a fit, as the
// engine writes them and the lead pages read them.
type LabellerFigures struct {
	Votes         int
	MedianSeconds *float64
	Accuracy      *float64
	GoldCorrect   int
	GoldTotal     int
	GoldLow       *float64
	GoldHigh      *float64
	Agreement     *float64
	Flags         []string
}

// LabellerStats is one labeller's figures from a fit.
type LabellerStats struct {
	UserID int64
	LabellerFigures
	Model *LabellerModel // stored as the confusion JSON
}

// SaveLabellerStats writes the figures of the labellers in stats, in one
// transaction, so the vote path never sees half a fit. A labeller left out
// keeps the row of an earlier fit.
func (s *Store) SaveLabellerStats(ctx context.Context, projectID int64, stats []LabellerStats) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		b := &pgx.Batch{}
		for _, st := range stats {
			var conf []byte
			if st.Model != nil {
				var err error
				if conf, err = json.Marshal(st.Model); err != nil {
					return err
				}
			}
			flags := st.Flags
			if flags == nil {
				flags = []string{}
			}
			b.Queue(`
				INSERT INTO labeller_stats (project_id, user_id, votes, median_seconds, accuracy, gold_correct,
					gold_total, gold_low, gold_high, agreement, flags, confusion, updated_at)
				VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, now())
				ON CONFLICT (project_id, user_id) DO UPDATE SET votes = excluded.votes,
					median_seconds = excluded.median_seconds, accuracy = excluded.accuracy,
					gold_correct = excluded.gold_correct, gold_total = excluded.gold_total,
					gold_low = excluded.gold_low, gold_high = excluded.gold_high, agreement = excluded.agreement,
					flags = excluded.flags, confusion = excluded.confusion, updated_at = now()`,
				projectID, st.UserID, st.Votes, st.MedianSeconds, st.Accuracy, st.GoldCorrect, st.GoldTotal,
				st.GoldLow, st.GoldHigh, st.Agreement, flags, conf)
		}
		return tx.SendBatch(ctx, b).Close()
	})
	if err != nil {
		return fmt.Errorf("save labeller figures of project %d: %w", projectID, mapErr(err))
	}
	return nil
}

// GoldMark is a labeller's gold figures when a lead last set their status.
type GoldMark struct {
	Correct, Total int
}

// GoldMarks returns the marks of a project's members that have one (a
// lead set their status after some gold answers), by user id.
func (s *Store) GoldMarks(ctx context.Context, projectID int64) (map[int64]GoldMark, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT user_id, gold_correct_mark, gold_total_mark FROM project_members
		WHERE project_id = $1 AND gold_total_mark > 0`, projectID)
	if err != nil {
		return nil, fmt.Errorf("gold marks of project %d: %w", projectID, err)
	}
	defer rows.Close()
	out := map[int64]GoldMark{}
	for rows.Next() {
		var id int64
		var m GoldMark
		if err := rows.Scan(&id, &m.Correct, &m.Total); err != nil {
			return nil, fmt.Errorf("gold marks of project %d: %w", projectID, err)
		}
		out[id] = m
	}
	return out, rows.Err()
}

// AutoPause pauses an active member with a reason; their votes stay. It
// reports whether the member was active (and is now paused). Members a lead
// paused or blocked are left as they are.
func (s *Store) AutoPause(ctx context.Context, projectID, userID int64, reason string) (bool, error) {
	tag, err := s.pool.Exec(ctx, `
		UPDATE project_members SET status = 'paused', status_reason = $3
		WHERE project_id = $1 AND user_id = $2 AND status = 'active'`, projectID, userID, reason)
	if err != nil {
		return false, fmt.Errorf("pause labeller %d in project %d: %w", userID, projectID, err)
	}
	return tag.RowsAffected() == 1, nil
}

// FitState is what the engine loop needs to decide whether a project is
// due for a refit.
type FitState struct {
	ProjectID int64
	FittedAt  *time.Time // nil before the first fit
	// NewVotes counts votes stored since the last fit (all, before the first).
	NewVotes int64
}

// FitStates lists every project with its votes since the last fit.
func (s *Store) FitStates(ctx context.Context) ([]FitState, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT p.id, ps.fitted_at,
			(SELECT count(*) FROM votes v WHERE v.project_id = p.id
				AND v.created_at > coalesce(ps.fitted_at, '-infinity'))
		FROM projects p LEFT JOIN project_stats ps ON ps.project_id = p.id
		ORDER BY p.id`)
	if err != nil {
		return nil, fmt.Errorf("fit states: %w", err)
	}
	defer rows.Close()
	var out []FitState
	for rows.Next() {
		var f FitState
		if err := rows.Scan(&f.ProjectID, &f.FittedAt, &f.NewVotes); err != nil {
			return nil, fmt.Errorf("fit states: %w", err)
		}
		out = append(out, f)
	}
	return out, rows.Err()
}

// engineLockClass is the first key of the engine's advisory locks, so they
// cannot collide with other advisory locks on the same database.
const engineLockClass = 0x436f6e63 // "Conc"

// WithProjectLock runs fn while holding the project's refit lock, a
// session-level advisory lock on a connection kept for the purpose, so
// whichever process gets it refits and the others skip. ran is false when
// another session holds the lock.
func (s *Store) WithProjectLock(ctx context.Context, projectID int64, fn func(ctx context.Context) error) (ran bool, err error) {
	conn, err := s.pool.Acquire(ctx)
	if err != nil {
		return false, fmt.Errorf("lock project %d: %w", projectID, err)
	}
	defer conn.Release()
	var got bool
	if err := conn.QueryRow(ctx, `SELECT pg_try_advisory_lock($1, $2)`, int32(engineLockClass), int32(projectID)).Scan(&got); err != nil {
		return false, fmt.Errorf("lock project %d: %w", projectID, err)
	}
	if !got {
		return false, nil
	}
	defer func() {
		// Unlock on a fresh context: ctx may be done, and a lock left on a
		// pooled connection would block every later refit.
		var ok bool
		if uerr := conn.QueryRow(context.Background(), `SELECT pg_advisory_unlock($1, $2)`, int32(engineLockClass), int32(projectID)).Scan(&ok); uerr != nil || !ok {
			conn.Conn().Close(context.Background())
			if err == nil && uerr != nil {
				err = fmt.Errorf("unlock project %d: %w", projectID, uerr)
			}
		}
	}()
	return true, fn(ctx)
}
