package store

import (
	"context"
	"fmt"
	"slices"
	"time"

	"github.com/jackc/pgx/v5"
)

// ClaimRequest asks for the next item a labeller should see.
type ClaimRequest struct {
	ProjectID  int64
	LabellerID int64
	// Exclude lists items the client holds already (its prefetch queue) or
	// has just skipped; they are neither resumed nor handed out again.
	Exclude []int64
	// Gold asks for a gold item first; the caller draws against the
	// project's gold rate, so the store does no randomness of its own.
	Gold bool
	// GoldSeed shuffles the gold items, so labellers do not all get the
	// same one first.
	GoldSeed int64
	// Lifetime is how long the claim lasts (the project's claim seconds).
	Lifetime time.Duration
	// TallySince starts the labeller's tally returned with the claim; the
	// zero time counts nothing (Claim.Tally stays zero), which spares the
	// claim a read of the labeller's votes.
	TallySince time.Time
}

// Claim is an item handed to a labeller until ExpiresAt.
type Claim struct {
	Item      Item
	ExpiresAt time.Time
	// Resumed says the labeller held this claim already (a reload).
	Resumed bool
	// Tally is the labeller's work in the project since TallySince.
	Tally Tally
}

// claimSQL picks and claims one item in one statement: a claim the
// labeller holds already (resume), else a gold item when asked, else the
// open item of highest priority that the labeller has not voted on and that
// fewer live claims hold than it still needs votes. Expired claims count for
// nothing and the labeller's own expired claim is overwritten in place.
const claimSQL = `
WITH resume AS (
	SELECT item_id AS id FROM claims c
	WHERE labeller_id = $2 AND project_id = $1 AND expires_at > now() AND item_id <> ALL($3)
		AND NOT EXISTS (SELECT 1 FROM votes v WHERE v.item_id = c.item_id AND v.labeller_id = $2)
	ORDER BY claimed_at, item_id
	LIMIT 1
), gold AS (
	SELECT i.id FROM items i JOIN gold_answers g ON g.item_id = i.id
	WHERE $4 AND g.project_id = $1 AND NOT EXISTS (SELECT 1 FROM resume)
		AND i.id <> ALL($3)
		AND NOT EXISTS (SELECT 1 FROM votes v WHERE v.item_id = i.id AND v.labeller_id = $2)
	ORDER BY md5(i.id::text || ':' || ($5::bigint)::text)
	LIMIT 1
	FOR UPDATE OF i SKIP LOCKED
), open AS (
	SELECT i.id FROM items i
	WHERE i.project_id = $1 AND i.status IN ('unstarted', 'needs_votes')
		AND NOT EXISTS (SELECT 1 FROM resume) AND NOT EXISTS (SELECT 1 FROM gold)
		AND i.id <> ALL($3)
		AND NOT EXISTS (SELECT 1 FROM gold_answers g WHERE g.item_id = i.id)
		AND NOT EXISTS (SELECT 1 FROM votes v WHERE v.item_id = i.id AND v.labeller_id = $2)
		AND i.votes_needed > (SELECT count(*) FROM claims c
			WHERE c.item_id = i.id AND c.expires_at > now() AND c.labeller_id <> $2)
	ORDER BY i.priority DESC, i.id
	LIMIT 1
	FOR UPDATE SKIP LOCKED
), chosen AS (
	SELECT id, 'resume' AS how FROM resume
	UNION ALL SELECT id, 'gold' FROM gold
	UNION ALL SELECT id, 'open' FROM open
	LIMIT 1
)
INSERT INTO claims (item_id, labeller_id, project_id, claimed_at, expires_at)
SELECT id, $2, $1, now(), now() + make_interval(secs => $6) FROM chosen
ON CONFLICT (item_id, labeller_id) DO UPDATE
	SET claimed_at = excluded.claimed_at, expires_at = excluded.expires_at
RETURNING item_id, expires_at, (SELECT how FROM chosen)`

// claimCheckSQL reads the item claimed by claimSQL in this transaction
// (the claims row this transaction wrote) and counts its live claims with
// a fresh snapshot. Under READ COMMITTED the claim statement's snapshot is
// taken before it locks the item row, so a claim committed by another
// labeller in between is invisible to it; this second look, made while the
// row lock is still held, sees every claim that could compete for the same
// slot. It cannot be folded into claimSQL: every part of one statement
// shares that statement's snapshot. The same fresh look tells whether the
// labeller's vote on the item committed while the claim waited on the
// claims row that vote deleted: the claim statement cannot see that vote,
// and without this check it would hand back an item already voted on. It
// travels in the same round trip as the claim and also returns the
// labeller's tally since $3 (none when $3 is NULL).
const claimCheckSQL = `SELECT ` + itemColumns + `,
	votes_needed, (SELECT count(*) FROM claims c WHERE c.item_id = items.id AND c.expires_at > now()),
	EXISTS (SELECT 1 FROM votes v WHERE v.item_id = items.id AND v.labeller_id = $2),
	t.votes, t.seconds
	FROM items, (SELECT count(*) AS votes, coalesce(sum(seconds), 0) AS seconds FROM votes v
		WHERE $3::timestamptz IS NOT NULL AND v.labeller_id = $2 AND v.project_id = $1 AND v.created_at >= $3) t
	WHERE id = (SELECT item_id FROM claims
		WHERE labeller_id = $2 AND project_id = $1 AND xmin = pg_current_xact_id()::xid)`

// maxClaimRetries bounds the retries after losing a last slot to a race
// (or claiming an item whose vote by the same labeller committed meanwhile).
const maxClaimRetries = 8

// ClaimNext claims the next item for a labeller, or ErrNotFound when
// nothing is left for them. Two labellers asking at once never share an
// item's last needed slot.
func (s *Store) ClaimNext(ctx context.Context, req ClaimRequest) (Claim, error) {
	var c Claim
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		c, err = claimInTx(ctx, tx, req)
		return err
	})
	if err != nil {
		return Claim{}, fmt.Errorf("claim next item in project %d for labeller %d: %w", req.ProjectID, req.LabellerID, mapErr(err))
	}
	return c, nil
}

// claimInTx claims within tx, whose commit releases the item row lock. A
// claim that lost the last slot to a race is taken back and the next item
// tried.
func claimInTx(ctx context.Context, tx pgx.Tx, req ClaimRequest) (Claim, error) {
	exclude := slices.Clone(req.Exclude)
	for range maxClaimRetries {
		var b pgx.Batch
		var r claimRound
		r.queue(&b, req, exclude)
		if err := tx.SendBatch(ctx, &b).Close(); err != nil {
			return Claim{}, err
		}
		if !r.found {
			return Claim{}, ErrNotFound
		}
		if r.keep() {
			return r.c, nil
		}
		if _, err := tx.Exec(ctx, dropClaimSQL, r.itemID, req.LabellerID); err != nil {
			return Claim{}, err
		}
		exclude = append(exclude, r.itemID)
	}
	return Claim{}, ErrNotFound
}

// dropClaimSQL takes back labeller $2's claim on item $1, one that must
// not stand.
const dropClaimSQL = `DELETE FROM claims WHERE item_id = $1 AND labeller_id = $2`

// claimRound is one claim attempt: claimSQL and its check, queued in a
// batch, and what they answered.
type claimRound struct {
	c            Claim
	found        bool // an item was claimed
	itemID       int64
	how          string
	needed, live int
	voted        bool
}

// queue adds the attempt to b, passing over the items in exclude.
func (r *claimRound) queue(b *pgx.Batch, req ClaimRequest, exclude []int64) {
	if exclude == nil {
		exclude = []int64{}
	}
	secs := req.Lifetime.Seconds()
	if secs <= 0 {
		secs = 300
	}
	var since *time.Time
	if !req.TallySince.IsZero() {
		since = &req.TallySince
	}
	b.Queue(claimSQL, req.ProjectID, req.LabellerID, exclude, req.Gold, req.GoldSeed, secs).Query(func(rows pgx.Rows) error {
		if !rows.Next() {
			return rows.Err()
		}
		r.found = true
		err := rows.Scan(&r.itemID, &r.c.ExpiresAt, &r.how)
		r.c.Resumed = r.how == "resume"
		return err
	})
	b.Queue(claimCheckSQL, req.ProjectID, req.LabellerID, since).Query(func(rows pgx.Rows) error {
		if !rows.Next() {
			return rows.Err()
		}
		var err error
		r.c.Item, err = scanItem(withExtra{Row: rows, extra: []any{&r.needed, &r.live, &r.voted, &r.c.Tally.Votes, &r.c.Tally.Seconds}})
		return err
	})
}

// keep says whether the claim made stands: an item was claimed, the
// labeller has not voted on it, and (for an open item) no more labellers
// hold it than it needs votes. With nothing claimed there is nothing to
// take back either, and r.c is not to be used.
func (r *claimRound) keep() bool {
	return !r.found || !r.voted && (r.how != "open" || r.live <= r.needed)
}

// outcome is the claim to hand back, or the item of a claim that must be
// taken back (retake), once the round's transaction has committed.
func (r *claimRound) outcome() (claim *Claim, retake int64) {
	switch {
	case !r.found: // nothing claimed, or nothing asked for
		return nil, 0
	case !r.keep():
		return nil, r.itemID
	}
	c := r.c
	return &c, 0
}

// withExtra is a row whose leading columns go to lead and trailing columns
// to extra, so scanItem or scanProject can read a row with more columns.
type withExtra struct {
	pgx.Row
	extra []any
	lead  []any
}

func (r withExtra) Scan(dest ...any) error {
	return r.Row.Scan(append(append(slices.Clip(r.lead), dest...), r.extra...)...)
}

// ReleaseClaim gives a claimed item back (the labeller skipped it).
// Releasing a claim the labeller does not hold is not an error.
func (s *Store) ReleaseClaim(ctx context.Context, projectID, labellerID, itemID int64) error {
	_, err := s.pool.Exec(ctx, `DELETE FROM claims WHERE item_id = $1 AND labeller_id = $2 AND project_id = $3`,
		itemID, labellerID, projectID)
	if err != nil {
		return fmt.Errorf("release claim on item %d for labeller %d: %w", itemID, labellerID, err)
	}
	return nil
}

// ItemAccess says whether a labeller may see an item: they hold a claim
// on it (live or expired but not taken over) or voted on it.
func (s *Store) ItemAccess(ctx context.Context, projectID, labellerID, itemID int64) (bool, error) {
	var ok bool
	err := s.pool.QueryRow(ctx, `
		SELECT EXISTS (SELECT 1 FROM claims WHERE item_id = $1 AND labeller_id = $2 AND project_id = $3)
		    OR EXISTS (SELECT 1 FROM votes WHERE item_id = $1 AND labeller_id = $2 AND project_id = $3)`,
		itemID, labellerID, projectID).Scan(&ok)
	if err != nil {
		return false, fmt.Errorf("access of labeller %d to item %d: %w", labellerID, itemID, err)
	}
	return ok, nil
}
