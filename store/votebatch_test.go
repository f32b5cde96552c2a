package store_test

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sync"
	"testing"
	"time"

	"github.com/concord-labs/concord/store"
	"github.com/jackc/pgx/v5"
)

// batchVoteID makes a vote UUID unique to this run of the test, so the
// tests also pass with -count above 1 on one database.
func batchVoteID(n int) string {
	return fmt.Sprintf("ba7c0000-%04x-4a2b-9c3d-%012x", n, time.Now().UnixNano()&0xffffffffffff)
}

// holdItem opens a transaction holding the item's row lock, as a vote on
// it does; it is rolled back at the test's end unless committed first.
func (f *fixture) holdItem(t *testing.T, item int64) pgx.Tx {
	t.Helper()
	ctx := context.Background()
	tx, err := f.s.Pool().Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { tx.Rollback(ctx) })
	if _, err := tx.Exec(ctx, `SELECT 1 FROM items WHERE id = $1 FOR UPDATE`, item); err != nil {
		t.Fatal(err)
	}
	return tx
}

func (f *fixture) claimFor(t *testing.T, item, labeller int64) {
	t.Helper()
	f.exec(t, `INSERT INTO claims (item_id, labeller_id, project_id, expires_at)
		VALUES ($1, $2, $3, now() + interval '1 minute')`, item, labeller, f.project.ID)
}

// TestVoteBatch writes five votes in one transaction: two on one item, a
// vote on another, one with a label the project lacks and a repeat of a
// stored vote. The good ones commit together and each is counted; the bad
// ones get their errors and leave nothing behind.
func TestVoteBatch(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	items := addItems(t, f.s, f.project.ID, 4)
	x, y, z, w := items[0], items[1], items[2], items[3]
	f.exec(t, `UPDATE items SET votes_needed = 3 WHERE id = ANY($1)`, items)
	ls := append([]int64{f.labellers[0].ID, f.labellers[1].ID}, makeLabellers(t, f, "batch", 3)...)
	ana, ben, cy, dee, eve := ls[0], ls[1], ls[2], ls[3], ls[4]
	f.claimFor(t, x, ana)
	f.claimFor(t, x, ben)
	f.claimFor(t, y, cy)
	f.claimFor(t, y, dee)
	f.claimFor(t, w, eve)
	f.claimFor(t, z, eve)
	glass, pet := f.labels["glass"].ID, f.labels["pet-bottle"].ID
	repeat := store.NewVote{ID: batchVoteID(9), ProjectID: f.project.ID, ItemID: w, LabellerID: eve, LabelID: &glass, Seconds: 1}
	if _, err := f.s.RecordVote(ctx, repeat, countDecider); err != nil {
		t.Fatal(err)
	}
	next := func(l int64) *store.ClaimRequest {
		return &store.ClaimRequest{ProjectID: f.project.ID, LabellerID: l, Lifetime: time.Minute}
	}
	// eve's vote on z reuses the id of her vote on w, as a faulty client
	// might.
	reused := repeat
	reused.ItemID = z
	tin := "tin-can"
	votes := []store.BatchVote{
		{Vote: store.NewVote{ID: batchVoteID(2), ProjectID: f.project.ID, ItemID: x, LabellerID: ana, LabelID: &glass, Seconds: 2}, Decide: countDecider, Next: next(ana)},
		{Vote: store.NewVote{ID: batchVoteID(1), ProjectID: f.project.ID, ItemID: x, LabellerID: ben, LabelID: &pet, Seconds: 3}, Decide: countDecider, Next: next(ben)},
		{Vote: store.NewVote{ID: batchVoteID(3), ProjectID: f.project.ID, ItemID: y, LabellerID: cy, LabelKey: &tin, Seconds: 4}, Decide: countDecider, Next: next(cy)},
		{Vote: store.NewVote{ID: batchVoteID(4), ProjectID: f.project.ID, ItemID: y, LabellerID: dee, LabelID: &glass, Seconds: 5}, Decide: countDecider, Next: next(dee)},
		{Vote: reused, Decide: countDecider, Next: next(eve)},
	}
	outs, err := f.s.VoteBatchTx(ctx, votes)
	if err != nil {
		t.Fatal(err)
	}
	if !errors.Is(outs[2].Err, store.ErrUnknownLabel) {
		t.Errorf("vote with an unknown label: %v, want ErrUnknownLabel", outs[2].Err)
	}
	if !errors.Is(outs[4].Err, store.ErrNotInserted) {
		t.Errorf("vote with a used id: %v, want ErrNotInserted", outs[4].Err)
	}
	for _, i := range []int{0, 1, 3} {
		o := outs[i]
		if o.Err != nil || o.Claim == nil {
			t.Fatalf("vote %d: err %v, claim %v; want stored with a next item", i, o.Err, o.Claim)
		}
		if o.Claim.Item.ID == votes[i].Vote.ItemID || o.Claim.Item.ID == x {
			t.Errorf("vote %d: next item %d, want neither the item voted on nor the finished item %d", i, o.Claim.Item.ID, x)
		}
	}
	// Both votes on x count: countDecider finishes an item at two votes
	// and takes the last vote's label as consensus, so the second vote's
	// decision (made after reading the first) is the one that stands. Its
	// id sorts first: the votes keep the order they were written in, not
	// that of their ids, though they share a transaction's start time.
	it, err := f.s.Item(ctx, f.project.ID, x)
	if err != nil || it.VoteCount != 2 || it.Status != "done" {
		t.Fatalf("item x: %+v, %v; want 2 votes, done", it, err)
	}
	var consVotes int
	var consLabel int64
	if err := f.s.Pool().QueryRow(ctx, `SELECT vote_count, label_id FROM consensus WHERE item_id = $1`, x).Scan(&consVotes, &consLabel); err != nil {
		t.Fatal(err)
	}
	if consVotes != 2 || consLabel != pet {
		t.Errorf("consensus of x: %d votes, label %d; want 2, pet-bottle %d (ben's vote, written last)", consVotes, consLabel, pet)
	}
	if it, _ := f.s.Item(ctx, f.project.ID, y); it.VoteCount != 1 {
		t.Errorf("item y: %d votes, want 1 (dee's; cy's label is unknown)", it.VoteCount)
	}
	// The stored votes share one transaction; cy keeps the claim on y, and
	// eve keeps hers on z and has still one vote.
	var txs, stored int
	if err := f.s.Pool().QueryRow(ctx, `SELECT count(DISTINCT xmin::text), count(*) FROM votes WHERE id = ANY($1::uuid[])`,
		[]string{votes[0].Vote.ID, votes[1].Vote.ID, votes[3].Vote.ID}).Scan(&txs, &stored); err != nil {
		t.Fatal(err)
	}
	if txs != 1 || stored != 3 {
		t.Errorf("%d votes stored in %d transactions, want 3 in 1", stored, txs)
	}
	var cyClaims, eveClaims, eveVotes int
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM claims WHERE labeller_id = $1 AND item_id = $2`, cy, y).Scan(&cyClaims)
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM claims WHERE labeller_id = $1 AND item_id = $2`, eve, z).Scan(&eveClaims)
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM votes WHERE labeller_id = $1`, eve).Scan(&eveVotes)
	if cyClaims != 1 || eveClaims != 1 || eveVotes != 1 {
		t.Errorf("cy holds %d claims on y, eve %d on z and has %d votes; want 1 each", cyClaims, eveClaims, eveVotes)
	}
	// Through the public call, the used id is refused and the true repeat
	// is a duplicate.
	if _, _, err := f.s.RecordVoteAndClaim(ctx, reused, countDecider, nil); !errors.Is(err, store.ErrConflict) {
		t.Errorf("used id through RecordVoteAndClaim: %v, want ErrConflict", err)
	}
	res, _, err := f.s.RecordVoteAndClaim(ctx, repeat, countDecider, nil)
	if err != nil || !res.Duplicate {
		t.Errorf("repeat through RecordVoteAndClaim: %+v, %v; want a duplicate", res, err)
	}
}

// twoOfEach makes a fixture with two items x and y; ana and ben are its
// labellers and glass a label.
func twoOfEach(t *testing.T) (f *fixture, x, y, ana, ben, glass int64) {
	t.Helper()
	f = newFixture(t)
	items := addItems(t, f.s, f.project.ID, 2)
	return f, items[0], items[1], f.labellers[0].ID, f.labellers[1].ID, f.labels["glass"].ID
}

// TestVoteBatchFailsAsAWhole: a vote whose statement raises aborts its
// batch, which then stores nothing; each vote tried alone then fares as
// it would have without batching.
func TestVoteBatchFailsAsAWhole(t *testing.T) {
	ctx := context.Background()
	f, x, y, ana, ben, glass := twoOfEach(t)
	f.claimFor(t, y, ben)
	if _, err := f.s.RecordVote(ctx, store.NewVote{ID: batchVoteID(1), ProjectID: f.project.ID, ItemID: y, LabellerID: ben, LabelID: &glass}, countDecider); err != nil {
		t.Fatal(err)
	}
	// A claim on an item ben voted on already: a second vote on it breaks
	// the one-vote-per-labeller rule inside the statement.
	f.claimFor(t, y, ben)
	f.claimFor(t, x, ana)
	good := store.NewVote{ID: batchVoteID(2), ProjectID: f.project.ID, ItemID: x, LabellerID: ana, LabelID: &glass}
	bad := store.NewVote{ID: batchVoteID(3), ProjectID: f.project.ID, ItemID: y, LabellerID: ben, LabelID: &glass}
	if _, err := f.s.VoteBatchTx(ctx, []store.BatchVote{{Vote: good, Decide: countDecider}, {Vote: bad, Decide: countDecider}}); err == nil {
		t.Fatal("batch with a second vote by one labeller on one item: no error")
	}
	var anaVotes, anaClaims int
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM votes WHERE labeller_id = $1`, ana).Scan(&anaVotes)
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM claims WHERE labeller_id = $1 AND item_id = $2`, ana, x).Scan(&anaClaims)
	if anaVotes != 0 || anaClaims != 1 {
		t.Fatalf("after the failed batch ana has %d votes and %d claims on x, want 0 and 1", anaVotes, anaClaims)
	}
	if _, err := f.s.RecordVote(ctx, good, countDecider); err != nil {
		t.Errorf("good vote alone: %v", err)
	}
	if _, err := f.s.RecordVote(ctx, bad, countDecider); !errors.Is(err, store.ErrConflict) {
		t.Errorf("bad vote alone: %v, want ErrConflict", err)
	}
}

// TestVoteBatchPassesOverLockedItems: a batch does not wait for an item
// another transaction holds (it would keep its other items locked all
// that time); that vote writes nothing and goes to a later batch. Through
// the public call it is stored once the item is free.
func TestVoteBatchPassesOverLockedItems(t *testing.T) {
	ctx := context.Background()
	f, x, y, ana, ben, glass := twoOfEach(t)
	f.claimFor(t, x, ana)
	f.claimFor(t, y, ben)
	holder := f.holdItem(t, x)
	onX := store.NewVote{ID: batchVoteID(1), ProjectID: f.project.ID, ItemID: x, LabellerID: ana, LabelID: &glass}
	onY := store.NewVote{ID: batchVoteID(2), ProjectID: f.project.ID, ItemID: y, LabellerID: ben, LabelID: &glass}
	bounded, cancel := context.WithTimeout(ctx, 5*time.Second)
	defer cancel()
	outs, err := f.s.VoteBatchTx(bounded, []store.BatchVote{{Vote: onX, Decide: countDecider}, {Vote: onY, Decide: countDecider}})
	if err != nil {
		t.Fatalf("batch with a held item: %v (it must not wait for the item)", err)
	}
	if !outs[0].Skipped || outs[1].Skipped || outs[1].Err != nil {
		t.Fatalf("outcomes %+v; want the vote on the held item passed over and the other stored", outs)
	}
	var anaVotes, anaClaims, benVotes int
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM votes WHERE labeller_id = $1`, ana).Scan(&anaVotes)
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM claims WHERE labeller_id = $1 AND item_id = $2`, ana, x).Scan(&anaClaims)
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM votes WHERE labeller_id = $1`, ben).Scan(&benVotes)
	if anaVotes != 0 || anaClaims != 1 || benVotes != 1 {
		t.Fatalf("ana: %d votes, %d claims on x (want 0, 1); ben: %d votes (want 1)", anaVotes, anaClaims, benVotes)
	}
	// Passed over by batches and then made alone, the vote waits for the
	// holder and is stored.
	done := make(chan error, 1)
	go func() {
		_, err := f.s.RecordVote(ctx, onX, countDecider)
		done <- err
	}()
	waitForLockWaiter(t, f.s)
	holder.Rollback(ctx)
	if err := <-done; err != nil {
		t.Fatalf("vote on x once the item is free: %v", err)
	}
	if it, _ := f.s.Item(ctx, f.project.ID, x); it.VoteCount != 1 {
		t.Errorf("item x: %d votes, want 1", it.VoteCount)
	}
}

// TestVoteBatchClaimsAfterItsVotes: a claim in a batch sees the counts
// left by every vote of the batch. y needs one more vote and comes first
// in priority; ben's vote on y finishes it, so ana, voting on x in the
// same batch, must not be handed y.
func TestVoteBatchClaimsAfterItsVotes(t *testing.T) {
	ctx := context.Background()
	f, x, y, ana, ben, glass := twoOfEach(t)
	cy := makeLabellers(t, f, "cy", 1)[0]
	f.claimFor(t, y, cy)
	if _, err := f.s.RecordVote(ctx, store.NewVote{ID: batchVoteID(7), ProjectID: f.project.ID, ItemID: y, LabellerID: cy, LabelID: &glass}, countDecider); err != nil {
		t.Fatal(err)
	}
	f.exec(t, `UPDATE items SET priority = CASE WHEN id = $1 THEN 100 ELSE 0 END WHERE id IN ($1, $2)`, y, x)
	f.claimFor(t, x, ana)
	f.claimFor(t, y, ben)
	next := func(l int64) *store.ClaimRequest {
		return &store.ClaimRequest{ProjectID: f.project.ID, LabellerID: l, Lifetime: time.Minute}
	}
	outs, err := f.s.VoteBatchTx(ctx, []store.BatchVote{
		{Vote: store.NewVote{ID: batchVoteID(1), ProjectID: f.project.ID, ItemID: x, LabellerID: ana, LabelID: &glass}, Decide: countDecider, Next: next(ana)},
		{Vote: store.NewVote{ID: batchVoteID(2), ProjectID: f.project.ID, ItemID: y, LabellerID: ben, LabelID: &glass}, Decide: countDecider, Next: next(ben)},
	})
	if err != nil {
		t.Fatal(err)
	}
	if c := outs[0].Claim; c != nil && c.Item.ID == y {
		t.Errorf("ana was handed item %d, which ben's vote in the same batch finished", y)
	}
	var status string
	var needed, live int
	f.s.Pool().QueryRow(ctx, `SELECT status, votes_needed, (SELECT count(*) FROM claims WHERE item_id = $1 AND expires_at > now()) FROM items WHERE id = $1`, y).Scan(&status, &needed, &live)
	if status != "done" || live > needed {
		t.Errorf("item y: %s, %d live claims, %d votes needed; want done with no claims", status, live, needed)
	}
}

// TestSplitVoteBatch: one vote per labeller per batch (a second waits for
// the next batch), votes sorted by item, and votes whose callers gave up
// answered at once.
func TestSplitVoteBatch(t *testing.T) {
	live := context.Background()
	gone, cancel := context.WithCancel(live)
	cancel()
	labellers := []int64{5, 3, 5, 7, 9}
	items := []int64{9, 2, 1, 4, 3}
	ctxs := []context.Context{live, live, live, live, gone}
	votes := make([]store.NewVote, len(items))
	for i := range votes {
		votes[i] = store.NewVote{LabellerID: labellers[i], ItemID: items[i]}
	}
	batch, carry, answered := store.SplitVoteBatch(ctxs, votes)
	if !slices.Equal(batch, []int64{2, 4, 9}) || !slices.Equal(carry, []int64{1}) {
		t.Errorf("batch items %v, carried %v; want [2 4 9] and [1]", batch, carry)
	}
	if len(answered) != 1 || !errors.Is(answered[4], context.Canceled) {
		t.Errorf("answered at once: %v, want only vote 4 with context.Canceled", answered)
	}
}

// TestConcurrentVotesShareTransactions: labellers voting at once through
// the public call have their votes combined, and every vote is counted.
// Among them one vote breaks a rule inside its statement (ben's second
// vote on an item): the batch it lands in fails, and each of its votes is
// tried again alone, so only ben's is refused.
func TestConcurrentVotesShareTransactions(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	glass := f.labels["glass"].ID
	labellers := makeLabellers(t, f, "crowd", 24)
	ben := f.labellers[1].ID
	shared := false
	for round := 0; round < 5 && !shared; round++ {
		own := addItems(t, f.s, f.project.ID, len(labellers)+1)
		for i, l := range labellers {
			f.claimFor(t, own[i], l)
		}
		voted := own[len(labellers)]
		f.claimFor(t, voted, ben)
		if _, err := f.s.RecordVote(ctx, store.NewVote{ID: batchVoteID(round*100 + 99), ProjectID: f.project.ID, ItemID: voted, LabellerID: ben, LabelID: &glass}, countDecider); err != nil {
			t.Fatal(err)
		}
		f.claimFor(t, voted, ben)
		ids := make([]string, len(labellers))
		var wg sync.WaitGroup
		start := make(chan struct{})
		wg.Go(func() {
			<-start
			v := store.NewVote{ID: batchVoteID(round*100 + 98), ProjectID: f.project.ID, ItemID: voted, LabellerID: ben, LabelID: &glass}
			if _, err := f.s.RecordVote(ctx, v, countDecider); !errors.Is(err, store.ErrConflict) {
				t.Errorf("round %d: ben's second vote on item %d: %v, want ErrConflict", round, voted, err)
			}
		})
		for i, l := range labellers {
			ids[i] = batchVoteID(round*100 + i)
			wg.Go(func() {
				<-start
				v := store.NewVote{ID: ids[i], ProjectID: f.project.ID, ItemID: own[i], LabellerID: l, LabelID: &glass, Seconds: 1}
				if _, err := f.s.RecordVote(ctx, v, countDecider); err != nil {
					t.Error(err)
				}
			})
		}
		close(start)
		wg.Wait()
		var txs, stored, counted int
		if err := f.s.Pool().QueryRow(ctx, `SELECT count(DISTINCT xmin::text), count(*) FROM votes WHERE id = ANY($1::uuid[])`, ids).Scan(&txs, &stored); err != nil {
			t.Fatal(err)
		}
		if err := f.s.Pool().QueryRow(ctx, `SELECT coalesce(sum(vote_count), 0) FROM items WHERE id = ANY($1)`, own[:len(labellers)]).Scan(&counted); err != nil {
			t.Fatal(err)
		}
		if stored != len(labellers) || counted != len(labellers) {
			t.Fatalf("round %d: %d votes stored and %d counted on items, want %d each", round, stored, counted, len(labellers))
		}
		shared = txs < stored
	}
	if !shared {
		t.Error("24 votes sent at once were never combined: each round wrote one transaction per vote")
	}
}
