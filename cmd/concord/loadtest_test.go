package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/web"
)

// openTestStore connects to this package's test database.
func openTestStore(t *testing.T) *store.Store {
	t.Helper()
	s, err := store.Open(context.Background(), testDB.URL)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(s.Close)
	return s
}

// loadProject makes a project (slug: prefix and a random suffix, so
// -count=2 can reuse the database) with the recycling taxonomy, no gold
// items, the given claim lifetime and n items. The items' bytes are never stored:
// the load driver does not fetch images.
func loadProject(t *testing.T, s *store.Store, prefix string, n, claimSeconds int) store.Project {
	t.Helper()
	slug := prefix + "-" + randomHex(3)
	ctx := context.Background()
	tax, err := readTaxonomyFile(filepath.Join("..", "..", "testdata", "taxonomy", "recycling.txt"))
	if err != nil {
		t.Fatal(err)
	}
	pol := store.DefaultPolicy()
	pol.GoldRate = 0
	pol.ClaimSeconds = claimSeconds
	p, err := s.CreateProjectWithTaxonomy(ctx, store.Project{Slug: slug, Name: "Load " + slug, Policy: pol, Pay: store.DefaultPay()},
		store.LabelInputsOf(tax))
	if err != nil {
		t.Fatal(err)
	}
	items := make([]store.NewItem, n)
	for i := range items {
		sum := sha256.Sum256(fmt.Appendf(nil, "%s frame %d", slug, i))
		items[i] = store.NewItem{SHA256: sum, FileKey: hex.EncodeToString(sum[:]), MediaType: "image/png",
			Bytes: 100, Width: 64, Height: 48}
	}
	if _, err := s.InsertItems(ctx, p.ID, items); err != nil {
		t.Fatal(err)
	}
	return p
}

// startWeb serves the web app in-process.
func startWeb(t *testing.T, s *store.Store) *httptest.Server {
	t.Helper()
	srv := httptest.NewServer(web.New(s, nil, web.Config{DataDir: t.TempDir()}).Handler())
	t.Cleanup(srv.Close)
	return srv
}

// voteCheck is what the database says about a project's votes.
type voteCheck struct {
	votes int
	// badCounts lists items whose vote_count differs from their labelled votes.
	badCounts []int64
}

func checkVotes(t *testing.T, s *store.Store, projectID int64) voteCheck {
	t.Helper()
	ctx := context.Background()
	var c voteCheck
	if err := s.Pool().QueryRow(ctx, `SELECT count(*) FROM votes WHERE project_id = $1`, projectID).Scan(&c.votes); err != nil {
		t.Fatal(err)
	}
	rows, err := s.Pool().Query(ctx, `
		SELECT i.id FROM items i
		WHERE i.project_id = $1 AND i.vote_count <> (SELECT count(*) FROM votes v WHERE v.item_id = i.id AND v.label_id IS NOT NULL)
		ORDER BY i.id`, projectID)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	for rows.Next() {
		var id int64
		if err := rows.Scan(&id); err != nil {
			t.Fatal(err)
		}
		c.badCounts = append(c.badCounts, id)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return c
}

func TestLoadtestCommandEndToEnd(t *testing.T) {
	s := openTestStore(t)
	p := loadProject(t, s, "load-e2e", 3000, 60)
	srv := startWeb(t, s)

	r := runConcord(t, "", []string{"loadtest", "--url", srv.URL, "--project", p.Slug, "--labellers", "4", "--duration", "2s", "--json"})
	if r.err != nil {
		t.Fatalf("loadtest: %v\n%s", r.err, r.stderr)
	}
	var rep struct {
		Labellers      int            `json:"labellers"`
		Duration       float64        `json:"duration_seconds"`
		Votes          int            `json:"votes"`
		VotesPerSecond float64        `json:"votes_per_second"`
		P50            float64        `json:"p50_ms"`
		P99            float64        `json:"p99_ms"`
		Errors         int            `json:"errors"`
		ErrorsByKind   map[string]int `json:"errors_by_kind"`
		Vote           latencySummary `json:"vote"`
		Claim          latencySummary `json:"claim"`
		VoteAndClaim   latencySummary `json:"vote_and_claim"`
	}
	if err := json.Unmarshal([]byte(r.stdout), &rep); err != nil {
		t.Fatalf("--json output is not JSON: %v\n%s", err, r.stdout)
	}
	if rep.Labellers != 4 || rep.Votes < 10 || rep.Errors != 0 {
		t.Errorf("labellers %d, votes %d, errors %d (%v); want 4 labellers, some votes, no errors", rep.Labellers, rep.Votes, rep.Errors, rep.ErrorsByKind)
	}
	if rep.Duration < 2 || rep.Duration > 4 {
		t.Errorf("duration_seconds = %v, want about 2", rep.Duration)
	}
	if want := float64(rep.Votes) / rep.Duration; rep.VotesPerSecond < want*0.99 || rep.VotesPerSecond > want*1.01 {
		t.Errorf("votes_per_second = %v, want votes/duration = %v", rep.VotesPerSecond, want)
	}
	if rep.Vote.Count != rep.Votes || rep.Claim.Count < 4 {
		t.Errorf("vote count %d (want %d), claim count %d (want one per labeller at least)", rep.Vote.Count, rep.Votes, rep.Claim.Count)
	}
	if !(0 < rep.P50 && rep.P50 <= rep.P99) || rep.P50 != rep.VoteAndClaim.P50 || rep.P99 != rep.VoteAndClaim.P99 {
		t.Errorf("p50 %v, p99 %v; vote+claim %+v", rep.P50, rep.P99, rep.VoteAndClaim)
	}
	c := checkVotes(t, s, p.ID)
	if c.votes != rep.Votes {
		t.Errorf("database holds %d votes, loadtest reported %d", c.votes, rep.Votes)
	}
	if len(c.badCounts) > 0 {
		t.Errorf("items whose vote_count differs from their labelled votes: %v", c.badCounts)
	}
	var members int
	s.Pool().QueryRow(context.Background(), `SELECT count(*) FROM project_members m JOIN users u ON u.id = m.user_id
		WHERE m.project_id = $1 AND u.login LIKE 'loadtest-%'`, p.ID).Scan(&members)
	if members != 4 {
		t.Errorf("loadtest made %d member accounts, want 4", members)
	}

	// The text report names every series.
	r = runConcord(t, "", []string{"loadtest", "--url", srv.URL, "--project", p.Slug, "--labellers", "2", "--duration", "300ms"})
	if r.err != nil {
		t.Fatal(r.err)
	}
	for _, want := range []string{"votes acknowledged", "claim next", "vote + claim next", "p99 ms", "errors: 0"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("text report lacks %q:\n%s", want, r.stdout)
		}
	}
}

// TestLoadtestFinishedProject: on a project whose every item is done, each
// claim finds nothing, and loadtest says so and fails instead of reporting
// zero votes as a clean run.
func TestLoadtestFinishedProject(t *testing.T) {
	ctx := context.Background()
	s := openTestStore(t)
	p := loadProject(t, s, "load-done", 20, 60)
	ids, _, _, err := s.ItemStates(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	plans := make([]store.ItemPlanRow, len(ids))
	for i, id := range ids {
		plans[i] = store.ItemPlanRow{ItemID: id, Status: "done"}
	}
	if n, err := s.WriteItemPlans(ctx, p.ID, plans); err != nil || n != len(ids) {
		t.Fatalf("marked %d of %d items done: %v", n, len(ids), err)
	}
	srv := startWeb(t, s)

	r := runConcord(t, "", []string{"loadtest", "--url", srv.URL, "--project", p.Slug, "--labellers", "2", "--duration", "300ms", "--json"})
	var ue usageError
	if r.err == nil || errors.As(r.err, &ue) {
		t.Fatalf("loadtest on a finished project: error %v, want a failure that is not a usage error\n%s", r.err, r.stdout)
	}
	for _, want := range []string{"project " + p.Slug + " has nothing left to vote on", "no vote was cast", "import more images", "maximum votes"} {
		if !strings.Contains(r.err.Error(), want) {
			t.Errorf("error %q lacks %q", r.err, want)
		}
	}
	if r.stdout != "" {
		t.Errorf("a failed run printed a report:\n%s", r.stdout)
	}
	if c := checkVotes(t, s, p.ID); c.votes != 0 {
		t.Errorf("database holds %d votes on a finished project", c.votes)
	}
}

func TestLoadtestLoginsFile(t *testing.T) {
	s := openTestStore(t)
	p := loadProject(t, s, "load-logins", 50, 60)
	srv := startWeb(t, s)
	accounts, err := createLoadAccounts(context.Background(), s, p.Slug, 2)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	file := filepath.Join(dir, "logins.txt")
	os.WriteFile(file, []byte("# two labellers\n"+accounts[0].login+"\n\n"+accounts[1].login+"\n"), 0o600)
	r := runConcord(t, accounts[0].password+"\n", []string{"loadtest", "--url", srv.URL, "--project", p.Slug,
		"--labellers", "2", "--duration", "300ms", "--logins", file, "--password-stdin", "--json"})
	if r.err != nil {
		t.Fatalf("%v\n%s", r.err, r.stderr)
	}
	var rep loadReport
	if err := json.Unmarshal([]byte(r.stdout), &rep); err != nil || rep.Votes == 0 || rep.Errors != 0 {
		t.Errorf("report %+v, %v", rep, err)
	}

	// Bad input names the file and line.
	bad := filepath.Join(dir, "bad.txt")
	os.WriteFile(bad, []byte("ana secret\nben\n"), 0o600)
	r = runConcord(t, "", []string{"loadtest", "--url", srv.URL, "--project", p.Slug, "--logins", bad})
	if r.err == nil || !strings.Contains(r.err.Error(), bad+`:2: no password for login "ben"`) {
		t.Errorf("logins line without a password: %v", r.err)
	}
	os.WriteFile(bad, []byte("ana secret extra\n"), 0o600)
	r = runConcord(t, "", []string{"loadtest", "--url", srv.URL, "--project", p.Slug, "--logins", bad})
	if r.err == nil || !strings.Contains(r.err.Error(), bad+`:1: want "login password", got 3 fields`) {
		t.Errorf("logins line with three fields: %v", r.err)
	}
	r = runConcord(t, "", []string{"loadtest", "--url", srv.URL, "--project", p.Slug, "--logins", file, "--password", "wrong", "--labellers", "1"})
	if r.err == nil || !strings.Contains(r.err.Error(), "HTTP 401") {
		t.Errorf("wrong password: %v", r.err)
	}
	r = runConcord(t, "", []string{"loadtest", "--url", srv.URL})
	var ue usageError
	if !errors.As(r.err, &ue) || !strings.Contains(r.err.Error(), "need --project") {
		t.Errorf("no --project: %v", r.err)
	}
}

// dropFirstVoteAnswer lets the first vote reach the server and then
// throws its answer away, as a dropped connection would.
type dropFirstVoteAnswer struct {
	next    http.RoundTripper
	mu      sync.Mutex
	dropped int
}

func (d *dropFirstVoteAnswer) RoundTrip(req *http.Request) (*http.Response, error) {
	resp, err := d.next.RoundTrip(req)
	if err != nil || !strings.HasSuffix(req.URL.Path, "/votes") {
		return resp, err
	}
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.dropped > 0 {
		return resp, err
	}
	d.dropped++
	io.Copy(io.Discard, resp.Body)
	resp.Body.Close()
	return nil, errors.New("connection reset by peer (simulated)")
}

// TestVoteRetryIsStoredOnce: a vote whose answer is lost is sent again
// with the same id, the server says it has it, and it is stored and
// counted once.
func TestVoteRetryIsStoredOnce(t *testing.T) {
	ctx := context.Background()
	s := openTestStore(t)
	p := loadProject(t, s, "load-retry", 5, 60)
	srv := startWeb(t, s)
	accounts, err := createLoadAccounts(ctx, s, p.Slug, 1)
	if err != nil {
		t.Fatal(err)
	}
	res := &loadResult{}
	c := newLabellerClient(loadConfig{baseURL: srv.URL, project: p.Slug, timeout: 5 * time.Second}, accounts[0], 0, http.DefaultTransport)
	drop := &dropFirstVoteAnswer{next: c.http.Transport}
	c.http.Transport = drop
	if err := c.login(ctx); err != nil {
		t.Fatal(err)
	}
	it, err := c.claim(ctx)
	if err != nil || it == nil {
		t.Fatalf("claim: %v, %v", it, err)
	}
	v := c.newVote(it.ID)
	label := "cardboard"
	v.Label = &label
	ans, err := c.vote(ctx, v, res)
	if err != nil {
		t.Fatal(err)
	}
	if drop.dropped != 1 || res.retries != 1 || res.duplicates != 1 || !ans.Repeat {
		t.Errorf("dropped %d, retries %d, duplicates %d, repeat %v; want 1, 1, 1, true", drop.dropped, res.retries, res.duplicates, ans.Repeat)
	}
	var n, count int
	s.Pool().QueryRow(ctx, `SELECT count(*) FROM votes WHERE id = $1`, v.ID).Scan(&n)
	s.Pool().QueryRow(ctx, `SELECT vote_count FROM items WHERE id = $1`, it.ID).Scan(&count)
	if n != 1 || count != 1 {
		t.Errorf("vote stored %d times, item vote_count %d; want 1 and 1", n, count)
	}
}

func TestPercentileNearestRank(t *testing.T) {
	// Worked example of the nearest-rank method on {15, 20, 35, 40, 50}
	// (Wikipedia, "Percentile", nearest-rank method; from memory):
	// P5 = 15, P30 = 20, P40 = 20, P50 = 35, P100 = 50.
	var l latencies
	for _, v := range []int{50, 15, 40, 20, 35} {
		l.add(time.Duration(v) * time.Millisecond)
	}
	for _, c := range []struct {
		p    float64
		want int
	}{{5, 15}, {30, 20}, {40, 20}, {50, 35}, {100, 50}} {
		if got := l.percentile(c.p); got != time.Duration(c.want)*time.Millisecond {
			t.Errorf("P%v = %v, want %d ms", c.p, got, c.want)
		}
	}
	var empty latencies
	if empty.percentile(99) != 0 {
		t.Error("percentile of no samples is not 0")
	}
	bounds, counts := l.histogram()
	// 15 ms and 20 ms fall in (8 ms, 16 ms] and (16 ms, 32 ms]; 35, 40, 50 in (32 ms, 64 ms].
	want := map[time.Duration]int{16 * time.Millisecond: 1, 32 * time.Millisecond: 1, 64 * time.Millisecond: 3}
	for i, b := range bounds {
		if counts[i] != want[b] {
			t.Errorf("bucket <= %v holds %d, want %d", b, counts[i], want[b])
		}
	}
}
