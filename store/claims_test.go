package store_test

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"sync"
	"testing"
	"time"

	"github.com/concord-labs/concord/store"
)

var itemSeq int

// addItems inserts n items with made-up bytes and returns their ids in order.
func addItems(t *testing.T, s *store.Store, projectID int64, n int) []int64 {
	t.Helper()
	items := make([]store.NewItem, n)
	for i := range items {
		itemSeq++
		sum := sha256.Sum256(fmt.Appendf(nil, "item %d of project %d", itemSeq, projectID))
		items[i] = store.NewItem{SHA256: sum, FileKey: hex.EncodeToString(sum[:]), MediaType: "image/png",
			Bytes: 100, Width: 10, Height: 10}
	}
	got, err := s.InsertItems(context.Background(), projectID, items)
	if err != nil {
		t.Fatal(err)
	}
	ids := make([]int64, n)
	for i, it := range items {
		ids[i] = got[it.SHA256]
	}
	return ids
}

func claim(t *testing.T, s *store.Store, projectID, labeller int64, exclude ...int64) (store.Claim, error) {
	t.Helper()
	return s.ClaimNext(context.Background(), store.ClaimRequest{ProjectID: projectID, LabellerID: labeller,
		Exclude: exclude, Lifetime: time.Minute})
}

func TestClaimOrderResumeAndExclude(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	ids := addItems(t, f.s, f.project.ID, 3)
	// The highest priority comes first.
	if _, err := f.s.Pool().Exec(ctx, `UPDATE items SET priority = 5 WHERE id = $1`, ids[2]); err != nil {
		t.Fatal(err)
	}
	ana := f.labellers[0].ID
	c, err := claim(t, f.s, f.project.ID, ana)
	if err != nil || c.Item.ID != ids[2] || c.Resumed {
		t.Fatalf("first claim = %d (resumed %v), %v; want item %d", c.Item.ID, c.Resumed, err, ids[2])
	}
	// Asking again without excluding it resumes the same claim.
	c, err = claim(t, f.s, f.project.ID, ana)
	if err != nil || c.Item.ID != ids[2] || !c.Resumed {
		t.Fatalf("second claim = %d (resumed %v), %v; want resumed %d", c.Item.ID, c.Resumed, err, ids[2])
	}
	// Excluding it (the client holds it already) gives the next one by id.
	c, err = claim(t, f.s, f.project.ID, ana, ids[2])
	if err != nil || c.Item.ID != ids[0] {
		t.Fatalf("claim excluding %d = %d, %v; want %d", ids[2], c.Item.ID, err, ids[0])
	}
	if _, err := claim(t, f.s, f.project.ID, ana, ids...); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("claim excluding all: err = %v, want ErrNotFound", err)
	}
	ok, err := f.s.ItemAccess(ctx, f.project.ID, ana, ids[0])
	if err != nil || !ok {
		t.Errorf("access to a claimed item = %v, %v", ok, err)
	}
	ok, _ = f.s.ItemAccess(ctx, f.project.ID, ana, ids[1])
	if ok {
		t.Error("access to an unclaimed item granted")
	}
}

func TestClaimNeverExceedsVotesNeeded(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	id := addItems(t, f.s, f.project.ID, 1)[0]
	// votes_needed is 1 by default: one claim takes the only slot.
	ana, ben := f.labellers[0].ID, f.labellers[1].ID
	if c, err := claim(t, f.s, f.project.ID, ana); err != nil || c.Item.ID != id {
		t.Fatalf("ana's claim = %v, %v", c.Item.ID, err)
	}
	if _, err := claim(t, f.s, f.project.ID, ben); !errors.Is(err, store.ErrNotFound) {
		t.Fatalf("ben's claim on a full item: err = %v, want ErrNotFound", err)
	}
	// Once ana's claim expires, the item returns to the pool.
	if _, err := f.s.Pool().Exec(ctx, `UPDATE claims SET claimed_at = now() - interval '2 hours', expires_at = now() - interval '1 hour' WHERE item_id = $1`, id); err != nil {
		t.Fatal(err)
	}
	if c, err := claim(t, f.s, f.project.ID, ben); err != nil || c.Item.ID != id {
		t.Fatalf("ben's claim after expiry = %v, %v; want %d", c.Item.ID, err, id)
	}
	// Skipping releases it again.
	if err := f.s.ReleaseClaim(ctx, f.project.ID, ben, id); err != nil {
		t.Fatal(err)
	}
	if c, err := claim(t, f.s, f.project.ID, ana); err != nil || c.Item.ID != id {
		t.Fatalf("ana's claim after ben skipped = %v, %v", c.Item.ID, err)
	}
}

// TestClaimRace has many labellers claim at once, round after round, items
// that each need one vote: no item may ever hold two live claims.
func TestClaimRace(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	labellers := makeLabellers(t, f, "racer", 8)
	for round := range 30 {
		addItems(t, f.s, f.project.ID, 3)
		var wg sync.WaitGroup
		got := make([]int64, len(labellers))
		for i, l := range labellers {
			wg.Go(func() {
				c, err := f.s.ClaimNext(ctx, store.ClaimRequest{ProjectID: f.project.ID, LabellerID: l, Lifetime: time.Minute})
				if err == nil {
					got[i] = c.Item.ID
				} else if !errors.Is(err, store.ErrNotFound) {
					t.Error(err)
				}
			})
		}
		wg.Wait()
		oneEach(t, round, got, 3)
		if _, err := f.s.Pool().Exec(ctx, `DELETE FROM claims WHERE project_id = $1`, f.project.ID); err != nil {
			t.Fatal(err)
		}
		if _, err := f.s.Pool().Exec(ctx, `UPDATE items SET status = 'done' WHERE project_id = $1`, f.project.ID); err != nil {
			t.Fatal(err)
		}
	}
}

func TestGoldClaims(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	ids := addItems(t, f.s, f.project.ID, 4)
	if err := f.s.SetGoldAnswer(ctx, f.project.ID, ids[3], f.labels["glass"].ID, store.GoldSourceGold, nil); err != nil {
		t.Fatal(err)
	}
	ana := f.labellers[0].ID
	// Without the gold draw, the gold item is never handed out.
	c, err := claim(t, f.s, f.project.ID, ana, ids[0], ids[1], ids[2])
	if !errors.Is(err, store.ErrNotFound) {
		t.Fatalf("claim without gold draw = %d, %v; want ErrNotFound", c.Item.ID, err)
	}
	c, err = f.s.ClaimNext(ctx, store.ClaimRequest{ProjectID: f.project.ID, LabellerID: ana, Gold: true, Lifetime: time.Minute})
	if err != nil || c.Item.ID != ids[3] {
		t.Fatalf("gold claim = %d, %v; want %d", c.Item.ID, err, ids[3])
	}
	glass := f.labels["glass"].ID
	res, err := f.s.RecordVote(ctx, store.NewVote{ID: "7b0c1a1e-0000-4000-8000-000000000001", ProjectID: f.project.ID,
		ItemID: ids[3], LabellerID: ana, LabelID: &glass, Seconds: 2}, nil)
	if err != nil || res.GoldLabel == nil || *res.GoldLabel != f.labels["glass"].ID {
		t.Fatalf("vote on gold item = %+v, %v", res, err)
	}
	// Voted on: no second gold claim for ana; the normal pool comes instead.
	c, err = f.s.ClaimNext(ctx, store.ClaimRequest{ProjectID: f.project.ID, LabellerID: ana, Gold: true, Lifetime: time.Minute})
	if err != nil || c.Item.ID != ids[0] {
		t.Fatalf("gold claim after voting on the only gold item = %d, %v; want %d", c.Item.ID, err, ids[0])
	}
}

// TestClaimWhileOwnVoteCommits asks for the next item while the labeller's
// vote on the item they hold is still in flight. The claim statement
// cannot see that uncommitted vote and waits on the claims row the vote
// deletes; once the vote commits it must not come back with that item.
func TestClaimWhileOwnVoteCommits(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	ids := addItems(t, f.s, f.project.ID, 3)
	ana := f.labellers[0].ID
	held, err := claim(t, f.s, f.project.ID, ana)
	if err != nil {
		t.Fatal(err)
	}
	// The vote's transaction, as RecordVote writes it: the claim goes, the
	// vote comes; not committed yet.
	tx, err := f.s.Pool().Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(ctx)
	if _, err := tx.Exec(ctx, `DELETE FROM claims WHERE item_id = $1 AND labeller_id = $2`, held.Item.ID, ana); err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, `INSERT INTO votes (id, project_id, item_id, labeller_id) VALUES (gen_random_uuid(), $1, $2, $3)`,
		f.project.ID, held.Item.ID, ana); err != nil {
		t.Fatal(err)
	}
	type result struct {
		c   store.Claim
		err error
	}
	done := make(chan result, 1)
	go func() {
		// The client's prefetch list holds some other item, not the one voted on.
		c, err := f.s.ClaimNext(ctx, store.ClaimRequest{ProjectID: f.project.ID, LabellerID: ana,
			Exclude: []int64{ids[2]}, Lifetime: time.Minute})
		done <- result{c, err}
	}()
	// Let the claim reach the row lock before the vote commits.
	waitForLockWaiter(t, f.s)
	if err := tx.Commit(ctx); err != nil {
		t.Fatal(err)
	}
	r := <-done
	if r.err != nil {
		t.Fatal(r.err)
	}
	if r.c.Item.ID == held.Item.ID {
		t.Fatalf("claim handed back item %d, which the labeller just voted on", held.Item.ID)
	}
	var left int
	if err := f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM claims WHERE item_id = $1 AND labeller_id = $2`,
		held.Item.ID, ana).Scan(&left); err != nil {
		t.Fatal(err)
	}
	if left != 0 {
		t.Errorf("%d claims left on the item voted on; want 0", left)
	}
}

// TestClaimTally: a claim returns the labeller's tally in the project
// since the time asked for, and counts nothing when no time is given.
func TestClaimTally(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	addItems(t, f.s, f.project.ID, 5)
	ana := f.labellers[0].ID
	glass := f.labels["glass"].ID
	for i, secs := range []float64{1.5, 2.25} {
		c, err := claim(t, f.s, f.project.ID, ana)
		if err != nil {
			t.Fatal(err)
		}
		v := store.NewVote{ID: fmt.Sprintf("7a1f0000-3333-4a2b-9c3d-00000000000%d", i+1), ProjectID: f.project.ID,
			ItemID: c.Item.ID, LabellerID: ana, LabelID: &glass, Seconds: secs}
		if _, err := f.s.RecordVote(ctx, v, countDecider); err != nil {
			t.Fatal(err)
		}
	}
	asked, err := f.s.ClaimNext(ctx, store.ClaimRequest{ProjectID: f.project.ID, LabellerID: ana,
		Lifetime: time.Minute, TallySince: time.Now().Add(-time.Hour)})
	if err != nil {
		t.Fatal(err)
	}
	if asked.Tally != (store.Tally{Votes: 2, Seconds: 3.75}) {
		t.Errorf("tally since an hour ago = %+v, want 2 votes, 3.75 s", asked.Tally)
	}
	later, err := f.s.ClaimNext(ctx, store.ClaimRequest{ProjectID: f.project.ID, LabellerID: ana,
		Lifetime: time.Minute, TallySince: time.Now().Add(time.Hour), Exclude: []int64{asked.Item.ID}})
	if err != nil {
		t.Fatal(err)
	}
	if later.Tally != (store.Tally{}) {
		t.Errorf("tally since an hour ahead = %+v, want nothing", later.Tally)
	}
	none, err := claim(t, f.s, f.project.ID, ana, asked.Item.ID, later.Item.ID)
	if err != nil {
		t.Fatal(err)
	}
	if none.Tally != (store.Tally{}) {
		t.Errorf("tally not asked for = %+v, want zero", none.Tally)
	}
}

// waitForLockWaiter waits (up to 5 s) until a backend of the test database
// waits on a lock, so a test can release it knowing the waiter is there.
func waitForLockWaiter(t *testing.T, s *store.Store) {
	t.Helper()
	deadline := time.Now().Add(5 * time.Second)
	for {
		var waiting int
		if err := s.Pool().QueryRow(context.Background(), `SELECT count(*) FROM pg_stat_activity
			WHERE datname = current_database() AND wait_event_type = 'Lock'`).Scan(&waiting); err != nil {
			t.Fatal(err)
		}
		if waiting > 0 || time.Now().After(deadline) {
			return
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// TestVoteAndClaimRace: labellers vote and claim their next item at once,
// in one transaction each, when fewer slots are open than labellers ask.
// No item ends up held by more labellers than it needs votes, and every
// claim handed back is one the database holds.
func TestVoteAndClaimRace(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	glass := f.labels["glass"].ID
	labellers := makeLabellers(t, f, "voter", 8)
	// Each round: every labeller holds one item of their own to vote on;
	// after the votes those items are done, and three fresh items with one
	// slot each are all that is left to claim.
	done := func(context.Context, store.ItemVotes) (store.ItemUpdate, error) {
		return store.ItemUpdate{Status: "done"}, nil
	}
	for round := range 20 {
		own := addItems(t, f.s, f.project.ID, len(labellers))
		for i, l := range labellers {
			if _, err := f.s.Pool().Exec(ctx, `INSERT INTO claims (item_id, labeller_id, project_id, expires_at)
				VALUES ($1, $2, $3, now() + interval '1 minute')`, own[i], l, f.project.ID); err != nil {
				t.Fatal(err)
			}
		}
		if _, err := f.s.Pool().Exec(ctx, `UPDATE items SET status = 'done' WHERE id = ANY($1)`, own); err != nil {
			t.Fatal(err)
		}
		fresh := addItems(t, f.s, f.project.ID, 3)
		var wg sync.WaitGroup
		got := make([]int64, len(labellers))
		for i, l := range labellers {
			wg.Go(func() {
				v := store.NewVote{ID: fmt.Sprintf("5c0e0000-6666-4a2b-9c3d-%012d", round*100+i+int(time.Now().UnixNano()%1e6)*1000),
					ProjectID: f.project.ID, ItemID: own[i], LabellerID: l, LabelID: &glass, Seconds: 1}
				_, c, err := f.s.RecordVoteAndClaim(ctx, v, done, &store.ClaimRequest{ProjectID: f.project.ID, LabellerID: l, Lifetime: time.Minute})
				if err != nil {
					t.Error(err)
				} else if c != nil {
					got[i] = c.Item.ID
				}
			})
		}
		wg.Wait()
		seen := oneEach(t, round, got, len(fresh))
		var held int
		if err := f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM claims WHERE project_id = $1`, f.project.ID).Scan(&held); err != nil {
			t.Fatal(err)
		}
		if held != len(seen) {
			t.Errorf("round %d: %d claims in the database, %d handed out", round, held, len(seen))
		}
		if _, err := f.s.Pool().Exec(ctx, `DELETE FROM claims WHERE project_id = $1`, f.project.ID); err != nil {
			t.Fatal(err)
		}
		if _, err := f.s.Pool().Exec(ctx, `UPDATE items SET status = 'done' WHERE project_id = $1`, f.project.ID); err != nil {
			t.Fatal(err)
		}
	}
}

// oneEach checks a round of claims on items needing one vote each: want
// items were handed out (got holds each labeller's item, 0 for none),
// none to two labellers. It returns how many labellers got each item.
func oneEach(t *testing.T, round int, got []int64, want int) map[int64]int {
	t.Helper()
	seen := map[int64]int{}
	for _, id := range got {
		if id != 0 {
			seen[id]++
		}
	}
	if len(seen) != want {
		t.Errorf("round %d: %d items claimed, want all %d (claims %v)", round, len(seen), want, got)
	}
	for id, n := range seen {
		if n > 1 {
			t.Fatalf("round %d: item %d claimed by %d labellers, needs 1 vote", round, id, n)
		}
	}
	return seen
}

// makeLabellers creates n labeller accounts (not members) named prefix0...
func makeLabellers(t *testing.T, f *fixture, prefix string, n int) []int64 {
	t.Helper()
	var ids []int64
	for i := range n {
		u, err := f.s.CreateUser(context.Background(), store.User{Login: fmt.Sprintf("%s%d-%s", prefix, i, f.project.Slug),
			DisplayName: prefix, Role: store.RoleLabeller})
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, u.ID)
	}
	return ids
}
