package store

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"
)

// ErrNoClaim means a vote came for an item the labeller does not hold, or
// from a labeller whose membership is paused or blocked.
var ErrNoClaim = &ConflictError{Constraint: "claim", Detail: "the item is not claimed by this labeller"}

// ErrUnknownLabel means a vote named a label key the project does not have.
var ErrUnknownLabel = errors.New("no label with this key in the project")

// NewVote is a vote as the client sends it. ID is made by the client, so a
// retry after a lost response is stored once.
type NewVote struct {
	ID         string // UUID
	ProjectID  int64
	ItemID     int64
	LabellerID int64
	// LabelID or LabelKey names the label; both nil means "can't tell".
	LabelID  *int64
	LabelKey *string
	Seconds  float64
}

// VoteResult says what happened to a vote.
type VoteResult struct {
	// Duplicate: this vote id was stored before; nothing changed now.
	Duplicate bool
	// GoldLabel is the item's known answer when it is a gold item; the
	// caller shows it only if the project gives gold feedback.
	GoldLabel *int64
	// VotedLabel is the label the vote stored (nil: can't tell).
	VotedLabel *int64
}

// RecordVote stores a vote, releases the labeller's claim, counts the vote
// on the item and updates the item's consensus and status through decide,
// all in one transaction. A vote id seen before returns Duplicate; a
// different second vote by the labeller on the item is ErrConflict, a vote
// without a claim (or by a paused member) ErrNoClaim, and a label key the
// project lacks ErrUnknownLabel.
func (s *Store) RecordVote(ctx context.Context, v NewVote, decide Decider) (VoteResult, error) {
	res, _, err := s.RecordVoteAndClaim(ctx, v, decide, nil)
	return res, err
}

// RecordVoteAndClaim is RecordVote followed, in the same transaction, by
// ClaimNext(next) when next is not nil. A repeated vote id claims in a
// transaction of its own. The claim is nil when nothing is left for the
// labeller.
//
// Votes that arrive while others are being written share a transaction
// (see votebatch.go); a vote alone, or one whose batch failed, goes
// through voteAndCommit. Either way the transaction takes two round trips
// to the database: BEGIN with the vote (which also reads the item's
// votes), then the item's new state, the claim with its check, and COMMIT
// together; a third when a vote on the item committed while this one
// waited for it.
func (s *Store) RecordVoteAndClaim(ctx context.Context, v NewVote, decide Decider, next *ClaimRequest) (VoteResult, *Claim, error) {
	var res VoteResult
	var claim *Claim
	var retake int64
	var err error
	out := s.batchedVote(ctx, v, decide, next)
	res, claim, retake, err = out.res, out.claim, out.retake, out.err
	for attempt := 0; out.alone && attempt < txAttempts; attempt++ {
		if res, claim, retake, err = s.voteAndCommit(ctx, v, decide, next); !retryable(err) {
			break
		}
	}
	// The vote is committed by now: a failure to claim again must not
	// send it round the loop, where it would come back as a repeat.
	if retake != 0 && err == nil {
		claim, err = s.retakeClaim(ctx, *next, retake)
	}
	if errors.Is(err, errNotInserted) {
		res, err = s.repeatedVote(ctx, v)
		if err == nil && next != nil {
			err = s.inTx(ctx, func(tx pgx.Tx) error { return claimOrNone(ctx, tx, *next, &claim) })
		}
	}
	if err != nil {
		if errors.Is(err, ErrUnknownLabel) || errors.Is(err, ErrNoClaim) {
			return VoteResult{}, nil, fmt.Errorf("vote on item %d by labeller %d: %w", v.ItemID, v.LabellerID, err)
		}
		return VoteResult{}, nil, fmt.Errorf("vote on item %d by labeller %d: %w", v.ItemID, v.LabellerID, mapErr(err))
	}
	return res, claim, nil
}

// voteAndCommit stores the vote and, when next is not nil, claims the
// next item, in a transaction of its own (writeVotes with voteSQL, which
// waits for the item). When the check finds that the claim, already
// committed, must not stand (it lost an item's last slot to a race, or the
// labeller's vote on it committed meanwhile), retake names its item and
// the caller takes it back and claims again.
func (s *Store) voteAndCommit(ctx context.Context, v NewVote, decide Decider, next *ClaimRequest) (VoteResult, *Claim, int64, error) {
	outs, err := s.writeVotes(ctx, []*voteJob{{v: v, decide: decide, next: next}}, voteSQL)
	if err != nil {
		return VoteResult{}, nil, 0, err
	}
	o := outs[0]
	return o.res, o.claim, o.retake, o.err
}

// writeVotes stores votes and claims their labellers' next items in one
// transaction of two round trips: BEGIN with every vote (sql: voteSQL, or
// batchVoteSQL in a batch), then every item's new state, every claim with
// its check, and a COMMIT that travels with them. The claims come last:
// their FOR UPDATE holds each claimed row to the commit, and labellers
// voting on that item wait for it. (Claiming first measured slower; a
// separate transaction costs a second commit.) Every item's new state
// also goes before any claim: a claim sees the items this transaction
// voted on (locked by itself, so not passed over) with their votes'
// claims already gone, and must see their counts after those votes too,
// or it takes a slot a vote has just filled.
//
// A vote that was not stored (unknown label, repeated id, no claim) wrote
// nothing, thanks to voteSQL's guards, and gets its error while the others
// go on; one whose item another transaction holds (batchVoteSQL) wrote
// nothing either and is marked skipped. A transaction that stored no vote
// is rolled back. An error returned means nothing was stored.
func (s *Store) writeVotes(ctx context.Context, jobs []*voteJob, sql string) ([]voteOutcome, error) {
	c, err := s.pool.Acquire(ctx)
	if err != nil {
		return nil, err
	}
	defer releaseAfterTx(c)
	rows := make([]voteRow, len(jobs))
	var b pgx.Batch
	b.Queue("begin")
	for i, j := range jobs {
		rows[i].queue(&b, sql, j.v)
	}
	if err := c.SendBatch(ctx, &b).Close(); err != nil {
		return nil, err
	}
	outs := make([]voteOutcome, len(jobs))
	stored := false
	var write pgx.Batch
	for i, j := range jobs {
		if rows[i].skipped {
			outs[i].skipped = true
			continue
		}
		res, err := rows[i].result()
		if err != nil {
			outs[i].err = err
			continue
		}
		if err := finishVote(ctx, c, j.v, j.decide, &res, &rows[i], &write); err != nil {
			return nil, err
		}
		outs[i].res, stored = res, true
	}
	if !stored {
		return outs, nil // releaseAfterTx rolls the transaction back
	}
	rounds := make([]claimRound, len(jobs))
	for i, j := range jobs {
		if j.next != nil && outs[i].err == nil && !outs[i].skipped {
			rounds[i].queue(&write, *j.next, j.next.Exclude)
		}
	}
	write.Queue("commit")
	if err := c.SendBatch(ctx, &write).Close(); err != nil {
		return nil, err
	}
	if c.Conn().PgConn().TxStatus() != 'I' {
		return nil, errors.New("the votes' transaction did not end at its COMMIT")
	}
	for i := range outs {
		if outs[i].err == nil && !outs[i].skipped {
			outs[i].claim, outs[i].retake = rounds[i].outcome()
		}
	}
	return outs, nil
}

// releaseAfterTx returns a connection to the pool after a transaction run
// by hand: any failure before its COMMIT ran leaves the transaction open,
// and it is rolled back (or the connection closed) first.
func releaseAfterTx(c *pgxpool.Conn) {
	if c.Conn().PgConn().TxStatus() != 'I' {
		if _, err := c.Exec(context.Background(), "rollback"); err != nil {
			c.Conn().Close(context.Background())
		}
	}
	c.Release()
}

// retakeClaim takes back a committed claim on item that must not stand
// and claims the labeller's next item, passing over that one.
func (s *Store) retakeClaim(ctx context.Context, next ClaimRequest, item int64) (*Claim, error) {
	var claim *Claim
	next.Exclude = append(slices.Clone(next.Exclude), item)
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, dropClaimSQL, item, next.LabellerID); err != nil {
			return err
		}
		return claimOrNone(ctx, tx, next, &claim)
	})
	return claim, err
}

// claimOrNone claims the next item in tx into out, leaving out nil when
// nothing is left for the labeller.
func claimOrNone(ctx context.Context, tx pgx.Tx, req ClaimRequest, out **Claim) error {
	c, err := claimInTx(ctx, tx, req)
	if errors.Is(err, ErrNotFound) {
		return nil
	}
	if err != nil {
		return err
	}
	*out = &c
	return nil
}

// voteSQL locks the item row (for a labelled vote; "can't tell" changes
// no count), deletes the claim and inserts the vote (the count goes up
// with the item's new status, in one row version). A paused
// or blocked member's claim does not match, so their vote is refused like
// one without a claim. A vote id stored before deletes no claim either,
// so a vote that is not inserted leaves nothing behind, even in a
// transaction shared with other votes (votebatch.go). The vote's time is
// the clock's, not the transaction's start, so the votes of one batch keep
// the order they were written in.
//
// It also reads what deciding the item's new state needs: its gold answer,
// the project's last fit, and its labelled votes with the new one merged
// in by (created_at, id). Those votes come from the statement's snapshot,
// taken before the row lock was granted; the locked row's vote_count is
// the latest committed. When the two disagree, a vote on the item
// committed (or was taken back) while this one waited, and the caller
// reads the votes again (itemVotes).
var voteSQL = voteSQLLocking("FOR UPDATE")

// batchVoteSQL is voteSQL for a vote in a batch (votebatch.go): when
// another transaction holds the item, it writes nothing and answers
// skipped, and the vote waits for a later batch. A batch waiting for one item would
// hold every other item it has locked, and the votes on those would wait
// behind it.
var batchVoteSQL = voteSQLLocking("FOR UPDATE SKIP LOCKED")

// voteSQLLocking writes voteSQL with the given lock on the item row.
func voteSQLLocking(lock string) string {
	return `
WITH lbl AS (
	SELECT id FROM taxonomy_nodes WHERE project_id = $2 AND key = $7
), lock AS (
	SELECT id, vote_count FROM items
	WHERE id = $3 AND ($5::bigint IS NOT NULL OR $7::text IS NOT NULL)
	` + lock + `
), c AS (
	DELETE FROM claims WHERE item_id = $3 AND labeller_id = $4 AND project_id = $2
		AND ($7::text IS NULL OR EXISTS (SELECT 1 FROM lbl))
		AND ($5::bigint IS NULL AND $7::text IS NULL OR EXISTS (SELECT 1 FROM lock))
		AND NOT EXISTS (SELECT 1 FROM votes WHERE id = $1)
		AND NOT EXISTS (SELECT 1 FROM project_members m
			WHERE m.project_id = $2 AND m.user_id = $4 AND m.status <> 'active')
	RETURNING item_id
), ins AS (
	INSERT INTO votes (id, project_id, item_id, labeller_id, label_id, seconds, created_at)
	SELECT $1, $2, $3, $4, coalesce($5, (SELECT id FROM lbl)), $6, clock_timestamp() FROM c
	ON CONFLICT (id) DO NOTHING
	RETURNING label_id, created_at
)
SELECT EXISTS (SELECT 1 FROM ins), (SELECT label_id FROM ins),
	$7::text IS NULL OR EXISTS (SELECT 1 FROM lbl), (SELECT vote_count FROM lock),
	($5::bigint IS NOT NULL OR $7::text IS NOT NULL) AND NOT EXISTS (SELECT 1 FROM lock),
	(SELECT label_id FROM gold_answers WHERE item_id = $3),
	(SELECT fitted_at FROM project_stats WHERE project_id = $2),
	coalesce(array_agg(x.labeller_id ORDER BY x.created_at, x.id), '{}'),
	coalesce(array_agg(x.label_id ORDER BY x.created_at, x.id), '{}')
FROM (
	SELECT labeller_id, label_id, created_at, id FROM votes
	WHERE item_id = $3 AND label_id IS NOT NULL AND EXISTS (SELECT 1 FROM ins WHERE label_id IS NOT NULL)
	UNION ALL
	SELECT $4, label_id, created_at, $1::uuid FROM ins WHERE label_id IS NOT NULL
) x`
}

// voteRow is voteSQL's answer.
type voteRow struct {
	inserted, labelKnown bool
	skipped              bool // batchVoteSQL found the item locked and wrote nothing
	label                *int64
	locked               *int   // the locked item's committed count; nil without a lock
	gold                 *int64 // the item's gold answer
	fitted               *time.Time
	labellers, labels    []int64 // the item's labelled votes, the new one included
}

func (r *voteRow) queue(b *pgx.Batch, sql string, v NewVote) {
	b.Queue(sql, v.ID, v.ProjectID, v.ItemID, v.LabellerID, v.LabelID, v.Seconds, v.LabelKey).QueryRow(func(row pgx.Row) error {
		*r = voteRow{}
		return row.Scan(&r.inserted, &r.label, &r.labelKnown, &r.locked, &r.skipped, &r.gold, &r.fitted, &r.labellers, &r.labels)
	})
}

// itemVotes returns the item's votes read with the vote, or false when a
// vote on the item committed meanwhile and they must be read again.
func (r *voteRow) itemVotes(ctx context.Context, tx querier, projectID, itemID int64) (ItemVotes, bool) {
	if r.locked == nil || len(r.labels) != *r.locked+1 {
		return ItemVotes{}, false
	}
	iv := ItemVotes{ProjectID: projectID, ItemID: itemID, Labellers: r.labellers, Labels: r.labels,
		GoldLabel: r.gold, VoteCount: len(r.labels)}
	if r.fitted != nil {
		iv.FittedAt = *r.fitted
	}
	iv.LoadModel = func() (ProjectModel, error) { return projectModel(ctx, tx, projectID) }
	return iv, true
}

func (r *voteRow) result() (VoteResult, error) {
	if !r.labelKnown {
		return VoteResult{}, ErrUnknownLabel
	}
	if !r.inserted {
		return VoteResult{}, errNotInserted
	}
	return VoteResult{VotedLabel: r.label}, nil
}

// finishVote reads what the stored vote changes and queues, unsent, the
// statements that write it in b, so they can share a round trip with the claim.
func finishVote(ctx context.Context, tx querier, v NewVote, decide Decider, res *VoteResult, row *voteRow, b *pgx.Batch) error {
	if res.VotedLabel == nil {
		// "Can't tell" changes no count and no consensus, but the gold
		// answer still decides the feedback.
		res.GoldLabel = row.gold
		return nil
	}
	iv, fresh := row.itemVotes(ctx, tx, v.ProjectID, v.ItemID)
	if !fresh {
		var err error
		if iv, err = itemVotes(ctx, tx, v.ProjectID, v.ItemID); err != nil {
			return err
		}
	}
	sql, args, err := itemDecision(ctx, v.ProjectID, v.ItemID, iv, decide, &res.GoldLabel, 1)
	if err != nil {
		return err
	}
	b.Queue(sql, args...)
	return nil
}

// repeatedVote answers a vote that was not inserted: a retry of a stored
// vote succeeds again, anything else is refused.
func (s *Store) repeatedVote(ctx context.Context, v NewVote) (VoteResult, error) {
	var labeller, item int64
	var label *int64
	err := s.pool.QueryRow(ctx, `SELECT labeller_id, item_id, label_id FROM votes WHERE id = $1`, v.ID).Scan(&labeller, &item, &label)
	switch {
	case err == nil && labeller == v.LabellerID && item == v.ItemID:
		res := VoteResult{Duplicate: true, VotedLabel: label}
		err := s.pool.QueryRow(ctx, `SELECT (SELECT label_id FROM gold_answers WHERE item_id = $1)`, v.ItemID).Scan(&res.GoldLabel)
		return res, err
	case err == nil:
		return VoteResult{}, fmt.Errorf("vote %s: id used by another vote: %w", v.ID, ErrConflict)
	case errors.Is(err, pgx.ErrNoRows):
		return VoteResult{}, ErrNoClaim
	default:
		return VoteResult{}, err
	}
}

var errNotInserted = errors.New("vote not inserted")

// updateItem changes the item's vote count by delta and recomputes its
// state through decide, unless it is a gold item, whose answer is fixed.
func updateItem(ctx context.Context, tx pgx.Tx, projectID, itemID int64, decide Decider, gold **int64, delta int) error {
	iv, err := itemVotes(ctx, tx, projectID, itemID)
	if err != nil {
		return err
	}
	sql, args, err := itemDecision(ctx, projectID, itemID, iv, decide, gold, delta)
	if err != nil {
		return err
	}
	_, err = tx.Exec(ctx, sql, args...)
	return err
}

// itemDecision decides the item's new state from its votes and returns
// the statement that writes it.
func itemDecision(ctx context.Context, projectID, itemID int64, iv ItemVotes, decide Decider, gold **int64, delta int) (string, []any, error) {
	*gold = iv.GoldLabel
	if iv.GoldLabel != nil || decide == nil {
		return `UPDATE items SET vote_count = vote_count + $2 WHERE id = $1`, []any{itemID, delta}, nil
	}
	u, err := decide(ctx, iv)
	if err != nil {
		return "", nil, err
	}
	sql, args := itemUpdateSQL(projectID, itemID, u, delta)
	return sql, args, nil
}

// UndoLastVote deletes the labeller's latest vote in the project if it is
// younger than window, restores the item's count and consensus, and claims
// the item for the labeller again. It returns the item; ErrNotFound when
// there is no vote young enough.
func (s *Store) UndoLastVote(ctx context.Context, projectID, labellerID int64, window, lifetime time.Duration, decide Decider) (Item, error) {
	var it Item
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var itemID int64
		var label *int64
		err := tx.QueryRow(ctx, `
			DELETE FROM votes WHERE id = (
				SELECT id FROM votes WHERE labeller_id = $2 AND project_id = $1
					AND created_at > now() - make_interval(secs => $3)
				ORDER BY created_at DESC LIMIT 1)
			RETURNING item_id, label_id`, projectID, labellerID, window.Seconds()).Scan(&itemID, &label)
		if err != nil {
			return err
		}
		_, err = tx.Exec(ctx, `
			INSERT INTO claims (item_id, labeller_id, project_id, expires_at)
			VALUES ($1, $2, $3, now() + make_interval(secs => $4))
			ON CONFLICT (item_id, labeller_id) DO UPDATE SET claimed_at = now(), expires_at = excluded.expires_at`,
			itemID, labellerID, projectID, lifetime.Seconds())
		if err != nil {
			return err
		}
		if label != nil {
			// Lock the row before reading the item's votes, as a vote does.
			if _, err := tx.Exec(ctx, `SELECT 1 FROM items WHERE id = $1 FOR UPDATE`, itemID); err != nil {
				return err
			}
			var gold *int64
			if err := updateItem(ctx, tx, projectID, itemID, decide, &gold, -1); err != nil {
				return err
			}
		}
		it, err = scanItem(tx.QueryRow(ctx, `SELECT `+itemColumns+` FROM items WHERE id = $1`, itemID))
		return err
	})
	if err != nil {
		return Item{}, fmt.Errorf("undo last vote of labeller %d in project %d: %w", labellerID, projectID, mapErr(err))
	}
	return it, nil
}

// Tally is a labeller's own work since a time.
type Tally struct {
	Votes   int     `json:"votes"`
	Seconds float64 `json:"seconds"`
}

// VoteTally counts a labeller's votes and time in a project since a time.
func (s *Store) VoteTally(ctx context.Context, projectID, labellerID int64, since time.Time) (Tally, error) {
	var t Tally
	err := s.pool.QueryRow(ctx, `
		SELECT count(*), coalesce(sum(seconds), 0) FROM votes
		WHERE labeller_id = $1 AND created_at >= $2 AND project_id = $3`, labellerID, since, projectID).Scan(&t.Votes, &t.Seconds)
	if err != nil {
		return Tally{}, fmt.Errorf("tally of labeller %d: %w", labellerID, err)
	}
	return t, nil
}

// Vote is a stored vote.
type Vote struct {
	ID         string
	ProjectID  int64
	ItemID     int64
	LabellerID int64
	LabelID    *int64
	Seconds    float64
	CreatedAt  time.Time
}

// VotesOfLabeller lists a labeller's votes in a project, newest first (for
// tests, the lead pages and pay).
func (s *Store) VotesOfLabeller(ctx context.Context, projectID, labellerID int64) ([]Vote, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT id::text, project_id, item_id, labeller_id, label_id, seconds, created_at FROM votes
		WHERE project_id = $1 AND labeller_id = $2 ORDER BY created_at DESC, id`, projectID, labellerID)
	if err != nil {
		return nil, fmt.Errorf("votes of labeller %d: %w", labellerID, err)
	}
	defer rows.Close()
	var out []Vote
	for rows.Next() {
		var v Vote
		var secs float32
		if err := rows.Scan(&v.ID, &v.ProjectID, &v.ItemID, &v.LabellerID, &v.LabelID, &secs, &v.CreatedAt); err != nil {
			return nil, fmt.Errorf("votes of labeller %d: %w", labellerID, err)
		}
		v.Seconds = float64(secs)
		out = append(out, v)
	}
	return out, rows.Err()
}
