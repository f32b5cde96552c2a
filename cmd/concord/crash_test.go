package main

import (
	"context"
	"errors"
	"fmt"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"syscall"
	"testing"
	"time"

	"github.com/concord-labs/concord/store"
)

// buildConcord compiles this command into a temporary folder.
func buildConcord(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "concord")
	cmd := exec.Command(filepath.Join(runtime.GOROOT(), "bin", "go"), "build", "-o", bin, ".")
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// freeAddr finds a port nobody listens on; the server then binds it, and
// binds it again after the crash, so clients keep their address.
func freeAddr(t *testing.T) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	return ln.Addr().String()
}

// startServer runs `concord serve` as a child process and waits until it
// answers /healthz.
func startServer(t *testing.T, bin, addr, dataDir string) *exec.Cmd {
	t.Helper()
	cmd := exec.Command(bin, "serve", "--addr", addr, "--data", dataDir)
	cmd.Env = append(os.Environ(), "DATABASE_URL="+testDB.URL, "CONCORD_LOG_LEVEL=error")
	cmd.Stderr = os.Stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
	for start := time.Now(); time.Since(start) < 15*time.Second; time.Sleep(50 * time.Millisecond) {
		resp, err := http.Get("http://" + addr + "/healthz")
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == http.StatusOK {
				return cmd
			}
		}
	}
	t.Fatalf("concord serve on %s did not come up", addr)
	return nil
}

// TestCrashKeepsAcknowledgedVotes kills the server with SIGKILL under load
// and checks, after a restart, that every vote a client saw acknowledged is
// stored, none twice, item counts agree with the votes, and the claims the
// dead server handed out expire and give their items back.
func TestCrashKeepsAcknowledgedVotes(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the binary and waits out a claim lifetime")
	}
	ctx := context.Background()
	const labellers, claimSeconds = 8, 10 // 10 s is the schema's shortest claim lifetime
	s := openTestStore(t)
	p := loadProject(t, s, "load-crash", 3000, claimSeconds)
	accounts, err := createLoadAccounts(ctx, s, p.Slug, labellers)
	if err != nil {
		t.Fatal(err)
	}
	bin := buildConcord(t)
	addr, data := freeAddr(t), t.TempDir()
	srv := startServer(t, bin, addr, data)
	cfg := loadConfig{baseURL: "http://" + addr, project: p.Slug, labellers: labellers, duration: 4 * time.Second,
		timeout: 2 * time.Second, started: make(chan struct{})}

	type outcome struct {
		res *loadResult
		err error
	}
	done := make(chan outcome, 1)
	go func() {
		res, err := runLoad(ctx, cfg, accounts)
		done <- outcome{res, err}
	}()
	select {
	case <-cfg.started:
	case out := <-done:
		t.Fatalf("load ended before it started: %v", out.err)
	}
	time.Sleep(2 * time.Second)
	if err := srv.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	srv.Wait()
	killedAt := time.Now()
	out := <-done
	if out.err != nil {
		t.Fatal(out.err)
	}
	res := out.res
	t.Logf("before the kill: %d votes acknowledged, vote + claim next %+v; errors after it: %v",
		len(res.acked), res.cycle.summary(), res.errors)
	if len(res.acked) == 0 {
		t.Fatal("no vote was acknowledged before the kill")
	}
	if len(res.errors) == 0 {
		t.Fatal("the clients saw no error: the kill did not land inside the load")
	}

	startServer(t, bin, addr, data)

	// Every acknowledged vote is stored, with the item and labeller it was sent for.
	ids := make([]string, len(res.acked))
	for i, a := range res.acked {
		ids[i] = a.ID
	}
	stored := map[string]int64{}
	rows, err := s.Pool().Query(ctx, `SELECT id::text, item_id FROM votes WHERE id = ANY($1::uuid[])`, ids)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var id string
		var item int64
		if err := rows.Scan(&id, &item); err != nil {
			t.Fatal(err)
		}
		stored[id] = item
	}
	rows.Close()
	for _, a := range res.acked {
		if item, ok := stored[a.ID]; !ok || item != a.ItemID {
			t.Errorf("acknowledged vote %s on item %d by %s: stored on item %d (found %v)", a.ID, a.ItemID, a.Login, item, ok)
		}
	}
	// No vote twice: no labeller twice on one item (the schema's unique
	// key, checked here all the same), and every item's count agrees.
	var twice int
	s.Pool().QueryRow(ctx, `SELECT count(*) FROM (SELECT 1 FROM votes WHERE project_id = $1
		GROUP BY item_id, labeller_id HAVING count(*) > 1) d`, p.ID).Scan(&twice)
	c := checkVotes(t, s, p.ID)
	if twice != 0 || len(c.badCounts) > 0 {
		t.Errorf("%d (item, labeller) pairs voted twice; items with a wrong vote_count: %v", twice, c.badCounts)
	}
	if c.votes < len(res.acked) {
		t.Errorf("database holds %d votes, fewer than the %d acknowledged", c.votes, len(res.acked))
	}

	// The dead server's labellers still hold claims; until they expire, no
	// other labeller can take an item whose needed votes they fill.
	held := heldClaims(t, s, p.ID)
	if len(held) == 0 {
		t.Fatal("no claim was live after the kill")
	}
	fresh, err := createLoadAccounts(ctx, s, p.Slug, 1)
	if err != nil {
		t.Fatal(err)
	}
	other, err := s.UserByLogin(ctx, fresh[0].login)
	if err != nil {
		t.Fatal(err)
	}
	allItems, _, _, err := s.ItemStates(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	claimOnly := func(item int64, lifetime time.Duration) (store.Claim, error) {
		exclude := slices.DeleteFunc(slices.Clone(allItems), func(id int64) bool { return id == item })
		return s.ClaimNext(ctx, store.ClaimRequest{ProjectID: p.ID, LabellerID: other.ID, Exclude: exclude, Lifetime: lifetime})
	}
	var latest time.Time
	for _, h := range held {
		latest = later(latest, h.expires)
		if h.open && h.live >= h.needed && time.Until(h.expires) > time.Second {
			if c, err := claimOnly(h.item, time.Second); !errors.Is(err, store.ErrNotFound) {
				t.Errorf("item %d, held by the dead server's labellers until %v, was claimed by another: %v, %v",
					h.item, h.expires.Format(time.TimeOnly), c.Item.ID, err)
				s.ReleaseClaim(ctx, p.ID, other.ID, h.item)
			}
		}
	}
	if d := time.Until(latest); d > 0 {
		t.Logf("waiting %.1f s for the dead server's claims (lifetime %d s, killed %.1f s ago) to expire",
			d.Seconds(), claimSeconds, time.Since(killedAt).Seconds())
		time.Sleep(d + 100*time.Millisecond)
	}
	for _, h := range held {
		var open bool
		if err := s.Pool().QueryRow(ctx, `SELECT status IN ('unstarted', 'needs_votes') AND votes_needed > 0 FROM items WHERE id = $1`,
			h.item).Scan(&open); err != nil {
			t.Fatal(err)
		}
		if !open {
			// Votes cast before the kill finished the item (the restarted
			// server's engine may decide so); it rightly stays out of the pool.
			continue
		}
		c, err := claimOnly(h.item, time.Minute)
		if err != nil || c.Item.ID != h.item || c.Resumed {
			t.Errorf("item %d did not return to the pool after its claim expired: %+v, %v", h.item, c, err)
			continue
		}
		if err := s.ReleaseClaim(ctx, p.ID, other.ID, h.item); err != nil {
			t.Fatal(err)
		}
	}
	if n := len(heldClaims(t, s, p.ID)); n != 0 {
		t.Errorf("%d claims still live after the lifetime", n)
	}

	// The restarted server takes votes again, from the same labellers.
	cfg.duration, cfg.timeout, cfg.started = 2*time.Second, 10*time.Second, nil
	after, err := runLoad(ctx, cfg, accounts)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("after the restart: %d votes, vote+claim %+v, claim %+v", len(after.acked), after.cycle.summary(), after.claim.summary())
	if len(after.acked) == 0 || len(after.errors) != 0 {
		t.Errorf("after the restart: %d votes, errors %v", len(after.acked), after.errors)
	}
	if c := checkVotes(t, s, p.ID); len(c.badCounts) > 0 {
		t.Errorf("after the restart, items with a wrong vote_count: %v", c.badCounts)
	}
}

// heldClaim is a live claim with its item's needs.
type heldClaim struct {
	item         int64
	expires      time.Time
	live, needed int
	open         bool // the item still wants votes
}

func heldClaims(t *testing.T, s *store.Store, projectID int64) []heldClaim {
	t.Helper()
	rows, err := s.Pool().Query(context.Background(), `
		SELECT c.item_id, max(c.expires_at), count(*), min(i.votes_needed),
			bool_and(i.status IN ('unstarted', 'needs_votes') AND i.votes_needed > 0)
		FROM claims c JOIN items i ON i.id = c.item_id
		WHERE c.project_id = $1 AND c.expires_at > now() GROUP BY c.item_id ORDER BY c.item_id`, projectID)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var out []heldClaim
	for rows.Next() {
		var h heldClaim
		if err := rows.Scan(&h.item, &h.expires, &h.live, &h.needed, &h.open); err != nil {
			t.Fatal(err)
		}
		out = append(out, h)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(fmt.Errorf("held claims: %w", err))
	}
	return out
}

func later(a, b time.Time) time.Time {
	if b.After(a) {
		return b
	}
	return a
}
