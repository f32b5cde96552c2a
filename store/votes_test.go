package store_test

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"testing"
	"time"

	"github.com/concord-labs/concord/store"
)

// countDecider marks an item done after two votes, so tests can see the
// decider's answer land on the item.
func countDecider(_ context.Context, iv store.ItemVotes) (store.ItemUpdate, error) {
	u := store.ItemUpdate{Status: "needs_votes", VotesNeeded: 2 - iv.VoteCount, Priority: 1}
	if iv.VoteCount >= 2 {
		u = store.ItemUpdate{Status: "done"}
	}
	if iv.VoteCount > 0 {
		l := iv.Labels[len(iv.Labels)-1]
		u.Consensus = &store.ConsensusRow{LabelID: &l, Confidence: 0.5, Method: store.MethodMajority,
			VoteCount: iv.VoteCount, PosteriorLabels: []int64{l}, Posterior: []float64{1}}
	}
	return u, nil
}

func TestRecordVote(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	id := addItems(t, f.s, f.project.ID, 1)[0]
	ana := f.labellers[0].ID
	glass := f.labels["glass"].ID
	vote := store.NewVote{ID: "0d9c6f1e-1111-4a2b-9c3d-000000000001", ProjectID: f.project.ID, ItemID: id,
		LabellerID: ana, LabelID: &glass, Seconds: 3.5}
	if _, err := f.s.RecordVote(ctx, vote, countDecider); !errors.Is(err, store.ErrNoClaim) {
		t.Fatalf("vote without a claim: err = %v, want ErrNoClaim", err)
	}
	if _, err := claim(t, f.s, f.project.ID, ana); err != nil {
		t.Fatal(err)
	}
	// Submitting one id several times at once stores one vote.
	var wg sync.WaitGroup
	results := make([]store.VoteResult, 5)
	errs := make([]error, 5)
	for i := range results {
		wg.Go(func() { results[i], errs[i] = f.s.RecordVote(ctx, vote, countDecider) })
	}
	wg.Wait()
	fresh := 0
	for i, err := range errs {
		if err != nil {
			t.Fatalf("submission %d: %v", i, err)
		}
		if !results[i].Duplicate {
			fresh++
		}
	}
	if fresh != 1 {
		t.Errorf("%d submissions stored as new, want 1", fresh)
	}
	votes, err := f.s.VotesOfLabeller(ctx, f.project.ID, ana)
	if err != nil || len(votes) != 1 || votes[0].Seconds != 3.5 || *votes[0].LabelID != glass {
		t.Fatalf("votes = %+v, %v; want one glass vote of 3.5 s", votes, err)
	}
	it, _ := f.s.Item(ctx, f.project.ID, id)
	if it.VoteCount != 1 || it.Status != "needs_votes" {
		t.Errorf("item after one vote: count %d status %q, want 1 needs_votes", it.VoteCount, it.Status)
	}
	// A different second vote by ana on the same item is refused.
	if _, err := claim(t, f.s, f.project.ID, ana); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("claim after voting on the only item: %v, want ErrNotFound", err)
	}
	if _, err := f.s.Pool().Exec(ctx, `INSERT INTO claims (item_id, labeller_id, project_id, expires_at) VALUES ($1, $2, $3, now() + interval '1 minute')`, id, ana, f.project.ID); err != nil {
		t.Fatal(err)
	}
	second := vote
	second.ID = "0d9c6f1e-1111-4a2b-9c3d-000000000002"
	if _, err := f.s.RecordVote(ctx, second, countDecider); !errors.Is(err, store.ErrConflict) {
		t.Errorf("second vote on one item: err = %v, want ErrConflict", err)
	}
	// A "can't tell" vote by ben is stored but not counted.
	ben := f.labellers[1].ID
	f.s.ReleaseClaim(ctx, f.project.ID, ana, id)
	if _, err := f.s.Pool().Exec(ctx, `UPDATE items SET votes_needed = 2 WHERE id = $1`, id); err != nil {
		t.Fatal(err)
	}
	if _, err := claim(t, f.s, f.project.ID, ben); err != nil {
		t.Fatal(err)
	}
	cant := store.NewVote{ID: "0d9c6f1e-1111-4a2b-9c3d-000000000003", ProjectID: f.project.ID, ItemID: id, LabellerID: ben, Seconds: 1}
	if _, err := f.s.RecordVote(ctx, cant, countDecider); err != nil {
		t.Fatal(err)
	}
	it, _ = f.s.Item(ctx, f.project.ID, id)
	if it.VoteCount != 1 {
		t.Errorf("vote count after a can't-tell vote = %d, want 1", it.VoteCount)
	}
	tally, err := f.s.VoteTally(ctx, f.project.ID, ben, time.Now().Add(-time.Hour))
	if err != nil || tally.Votes != 1 || tally.Seconds != 1 {
		t.Errorf("ben's tally = %+v, %v; want 1 vote, 1 s", tally, err)
	}
}

func TestUndoLastVote(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	id := addItems(t, f.s, f.project.ID, 1)[0]
	ana := f.labellers[0].ID
	glass := f.labels["glass"].ID
	if _, err := f.s.UndoLastVote(ctx, f.project.ID, ana, 10*time.Second, time.Minute, countDecider); !errors.Is(err, store.ErrNotFound) {
		t.Fatalf("undo with no vote: %v, want ErrNotFound", err)
	}
	claim(t, f.s, f.project.ID, ana)
	vote := store.NewVote{ID: "5e1f0000-2222-4a2b-9c3d-000000000001", ProjectID: f.project.ID, ItemID: id, LabellerID: ana, LabelID: &glass}
	if _, err := f.s.RecordVote(ctx, vote, countDecider); err != nil {
		t.Fatal(err)
	}
	it, err := f.s.UndoLastVote(ctx, f.project.ID, ana, 10*time.Second, time.Minute, countDecider)
	if err != nil || it.ID != id || it.VoteCount != 0 {
		t.Fatalf("undo = item %d count %d, %v; want item %d count 0", it.ID, it.VoteCount, err, id)
	}
	var rows int
	if err := f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM consensus WHERE item_id = $1`, id).Scan(&rows); err != nil || rows != 0 {
		t.Errorf("consensus rows after undoing the only vote = %d, %v; want 0", rows, err)
	}
	// The item is ana's again: the next claim resumes it, and a vote works.
	c, err := claim(t, f.s, f.project.ID, ana)
	if err != nil || c.Item.ID != id || !c.Resumed {
		t.Fatalf("claim after undo = %d resumed %v, %v", c.Item.ID, c.Resumed, err)
	}
	vote.ID = "5e1f0000-2222-4a2b-9c3d-000000000002"
	if _, err := f.s.RecordVote(ctx, vote, countDecider); err != nil {
		t.Fatal(err)
	}
	// Outside the window nothing is undone.
	if _, err := f.s.Pool().Exec(ctx, `UPDATE votes SET created_at = now() - interval '1 minute' WHERE id = $1`, vote.ID); err != nil {
		t.Fatal(err)
	}
	if _, err := f.s.UndoLastVote(ctx, f.project.ID, ana, 10*time.Second, time.Minute, countDecider); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("undo of an old vote: %v, want ErrNotFound", err)
	}
}

func TestInvites(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	hash := make([]byte, 32)
	hash[0] = byte(f.project.ID)
	hash[1] = 0xa5
	if _, err := f.s.CreateInvite(ctx, f.project.ID, f.lead.ID, hash, time.Now().Add(time.Hour)); err != nil {
		t.Fatal(err)
	}
	if _, err := f.s.OpenInvite(ctx, hash); err != nil {
		t.Fatal(err)
	}
	u, inv, err := f.s.AcceptInvite(ctx, hash, store.User{Login: "newbie-" + f.project.Slug, DisplayName: "Newbie", Role: store.RoleLead, PasswordHash: "h"})
	if err != nil || u.Role != store.RoleLabeller || inv.ProjectID != f.project.ID {
		t.Fatalf("accept = %+v, %+v, %v; want a labeller in project %d", u, inv, err, f.project.ID)
	}
	if _, err := f.s.MemberOf(ctx, f.project.ID, u.ID); err != nil {
		t.Errorf("new labeller is not a member: %v", err)
	}
	if _, _, err := f.s.AcceptInvite(ctx, hash, store.User{Login: "second-" + f.project.Slug, DisplayName: "x"}); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("second use of an invite: %v, want ErrNotFound", err)
	}
	list, err := f.s.Invites(ctx, f.project.ID)
	if err != nil || len(list) != 1 || list[0].UsedBy == nil || *list[0].UsedBy != u.ID {
		t.Errorf("invites = %+v, %v", list, err)
	}
}

func TestProjectLockIsExclusive(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	inside := make(chan struct{})
	release := make(chan struct{})
	done := make(chan bool)
	go func() {
		ran, err := f.s.WithProjectLock(ctx, f.project.ID, func(context.Context) error {
			close(inside)
			<-release
			return nil
		})
		if err != nil {
			t.Error(err)
		}
		done <- ran
	}()
	<-inside
	ran, err := f.s.WithProjectLock(ctx, f.project.ID, func(context.Context) error { return nil })
	if err != nil || ran {
		t.Errorf("second lock while the first is held: ran %v, %v; want skipped", ran, err)
	}
	close(release)
	if !<-done {
		t.Error("first lock did not run")
	}
	ran, err = f.s.WithProjectLock(ctx, f.project.ID, func(context.Context) error { return nil })
	if err != nil || !ran {
		t.Errorf("lock after release: ran %v, %v", ran, err)
	}
}

// TestVoteSeesVoteCommittedWhileWaiting: a vote reads the item's votes in
// its own statement, from a snapshot taken before it waits for the item's
// row lock. A vote by someone else committed during that wait must still
// reach the decider, as must the new vote itself, in time order.
func TestVoteSeesVoteCommittedWhileWaiting(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	id := addItems(t, f.s, f.project.ID, 1)[0]
	ana, ben := f.labellers[0].ID, f.labellers[1].ID
	glass := f.labels["glass"].ID
	if _, err := f.s.Pool().Exec(ctx, `UPDATE items SET votes_needed = 2 WHERE id = $1`, id); err != nil {
		t.Fatal(err)
	}
	for _, who := range []int64{ana, ben} {
		if _, err := f.s.Pool().Exec(ctx, `INSERT INTO claims (item_id, labeller_id, project_id, expires_at)
			VALUES ($1, $2, $3, now() + interval '1 minute')`, id, who, f.project.ID); err != nil {
			t.Fatal(err)
		}
	}
	var seen [][]int64
	var mu sync.Mutex
	decide := func(ctx context.Context, iv store.ItemVotes) (store.ItemUpdate, error) {
		mu.Lock()
		seen = append(seen, iv.Labellers)
		mu.Unlock()
		return countDecider(ctx, iv)
	}
	// Someone else's vote, committed while ben's vote waits on the row:
	// written by hand in a transaction that holds the item row.
	tx := f.holdItem(t, id)
	if _, err := tx.Exec(ctx, `DELETE FROM claims WHERE item_id = $1 AND labeller_id = $2`, id, ana); err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, `INSERT INTO votes (id, project_id, item_id, labeller_id, label_id, seconds)
		VALUES (gen_random_uuid(), $1, $2, $3, $4, 1)`, f.project.ID, id, ana, glass); err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, `UPDATE items SET vote_count = vote_count + 1 WHERE id = $1`, id); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() {
		_, err := f.s.RecordVote(ctx, store.NewVote{ID: fmt.Sprintf("9b1e0000-4444-4a2b-9c3d-%012d", time.Now().UnixNano()%1e12), ProjectID: f.project.ID,
			ItemID: id, LabellerID: ben, LabelID: &glass, Seconds: 2}, decide)
		done <- err
	}()
	waitForLockWaiter(t, f.s)
	if err := tx.Commit(ctx); err != nil {
		t.Fatal(err)
	}
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if len(seen) != 1 || len(seen[0]) != 2 || seen[0][0] != ana || seen[0][1] != ben {
		t.Fatalf("decider saw labellers %v, want one call with [%d %d]", seen, ana, ben)
	}
	it, err := f.s.Item(ctx, f.project.ID, id)
	if err != nil || it.VoteCount != 2 || it.Status != "done" {
		t.Errorf("item after both votes: count %d status %q, %v; want 2 done", it.VoteCount, it.Status, err)
	}
}
