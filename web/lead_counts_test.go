package web

import (
	"context"
	"fmt"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/PuerkitoBio/goquery"
	"github.com/google/go-cmp/cmp"
	"github.com/jackc/pgx/v5"

	"github.com/concord-labs/concord/store"
)

// TestRefitKeepsPageCounts: the refit stores per-labeller totals and votes
// per hour equal to a full count of the votes created before its cutoff,
// and the progress and cost figures (the count plus the votes since) equal
// a full count of every vote, the old way of computing them.
func TestRefitKeepsPageCounts(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	lead := e.login(e.user(store.RoleLead))
	k := e.knownProject()
	p := k.p
	pool := e.store.Pool()
	exec := func(sql string, args ...any) {
		t.Helper()
		if _, err := pool.Exec(ctx, sql, args...); err != nil {
			t.Fatalf("%s: %v", sql, err)
		}
	}
	// A fourth labeller with a vote older than the 7 days of votes per
	// hour the count keeps, and a "can't tell" two days ago.
	late := e.user(store.RoleLabeller)
	if err := e.store.AddMember(ctx, p.ID, late.ID); err != nil {
		t.Fatal(err)
	}
	glass := e.labelIDs(p)["glass"]
	exec(`INSERT INTO votes (id, project_id, item_id, labeller_id, label_id, seconds, created_at)
		VALUES (gen_random_uuid(), $1, $2, $3, $4, 4, now() - interval '9 days'),
			(gen_random_uuid(), $1, $5, $3, NULL, 6, now() - interval '2 days')`, p.ID, k.items[0], late.ID, glass, k.items[1])
	exec(`UPDATE items SET vote_count = vote_count + 1 WHERE id = $1`, k.items[0])
	if err := e.srv.RefitProject(ctx, p.ID); err != nil {
		t.Fatal(err)
	}

	var until time.Time
	if err := pool.QueryRow(ctx, `SELECT counted_until FROM project_stats WHERE project_id = $1`, p.ID).Scan(&until); err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff(
		queryStrings(t, pool, `SELECT labeller_id || ': ' || count(*) || ' votes, ' || count(*) FILTER (WHERE label_id IS NULL)
			|| ' can''t tell, ' || sum(seconds) || ' s, last ' || max(created_at)
			FROM votes WHERE project_id = $1 AND created_at < $2 GROUP BY labeller_id ORDER BY labeller_id`, p.ID, until),
		queryStrings(t, pool, `SELECT user_id || ': ' || votes_all || ' votes, ' || cant_tell || ' can''t tell, '
			|| seconds_total || ' s, last ' || last_vote_at
			FROM labeller_stats WHERE project_id = $1 AND votes_all > 0 ORDER BY user_id`, p.ID)); d != "" {
		t.Errorf("labeller totals kept by the refit (-full count +kept):\n%s", d)
	}
	if d := cmp.Diff(
		queryStrings(t, pool, `SELECT date_trunc('hour', created_at, 'UTC') || ': ' || count(*) FROM votes
			WHERE project_id = $1 AND created_at < $2 AND created_at >= $3
			GROUP BY date_trunc('hour', created_at, 'UTC') ORDER BY date_trunc('hour', created_at, 'UTC')`, p.ID, until, store.VoteHoursFrom(until)),
		queryStrings(t, pool, `SELECT hour || ': ' || votes FROM project_vote_hours WHERE project_id = $1 ORDER BY hour`, p.ID)); d != "" {
		t.Errorf("votes per hour kept by the refit (-full count +kept):\n%s", d)
	}

	// A vote after the count: the pages must see it although no refit has.
	exec(`INSERT INTO votes (id, project_id, item_id, labeller_id, label_id, seconds)
		VALUES (gen_random_uuid(), $1, $2, $3, NULL, 9)`, p.ID, k.items[5], k.labellers[2].ID)
	now := time.Now().UTC()

	since := now.Add(-10 * 24 * time.Hour).Truncate(time.Hour)
	hours, err := e.store.VotesPerHour(ctx, p.ID, since)
	if err != nil {
		t.Fatal(err)
	}
	var gotHours []string
	for _, h := range hours {
		gotHours = append(gotHours, fmt.Sprintf("%s: %d", h.Hour.Format(time.RFC3339), h.Votes))
	}
	if d := cmp.Diff(queryStrings(t, pool, `SELECT to_char(date_trunc('hour', created_at, 'UTC') AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS"Z"') || ': ' || count(*)
		FROM votes WHERE project_id = $1 AND created_at >= $2
		GROUP BY date_trunc('hour', created_at, 'UTC') ORDER BY date_trunc('hour', created_at, 'UTC')`, p.ID, since), gotHours); d != "" {
		t.Errorf("votes per hour over 10 days (-full count +count plus votes since):\n%s", d)
	}
	for _, back := range []time.Duration{time.Hour, 3 * 24 * time.Hour, 12 * 24 * time.Hour} {
		var want int
		if err := pool.QueryRow(ctx, `SELECT count(DISTINCT labeller_id) FROM votes WHERE project_id = $1 AND created_at >= $2`,
			p.ID, now.Add(-back)).Scan(&want); err != nil {
			t.Fatal(err)
		}
		if got, _, err := e.store.ActiveLabellers(ctx, p.ID, now.Add(-back), now.Add(-back)); err != nil || got != want {
			t.Errorf("active in the last %v: %d, %v; a full count gives %d", back, got, err, want)
		}
	}

	p.Pay = store.PayModel{Model: store.PayPerHour, Rate: 36, Currency: "EUR"}
	if _, err := e.store.UpdateProject(ctx, p); err != nil {
		t.Fatal(err)
	}
	doc := page(t, lead.get("/lead/p/"+p.Slug+"/cost"), http.StatusOK)
	// Full count, as the cost page computed it before the refit kept totals.
	want := queryStrings(t, pool, `SELECT u.login || ': ' || count(*) || ' votes, ' || to_char(sum(v.seconds) / 3600, 'FM0.00') || ' h, '
			|| to_char(sum(v.seconds) / 3600 * 36, 'FM0.00') || ' EUR'
		FROM votes v JOIN users u ON u.id = v.labeller_id WHERE v.project_id = $1 GROUP BY u.login ORDER BY u.login`, p.ID)
	var got []string
	doc.Find("#pay tbody tr").Each(func(_ int, r *goquery.Selection) {
		cell := func(i int) string { return strings.TrimSpace(r.Find("td").Eq(i).Text()) }
		got = append(got, cell(0)+": "+cell(1)+" votes, "+cell(2)+", "+cell(3))
	})
	slices.Sort(got)
	if d := cmp.Diff(want, got); d != "" {
		t.Errorf("pay table (-full count +page):\n%s", d)
	}
	var total int
	pool.QueryRow(ctx, `SELECT count(*) FROM votes WHERE project_id = $1`, p.ID).Scan(&total)
	if got := text(doc, "#fig-votes .value"); got != fmtInt(total) {
		t.Errorf("votes paid %q, a full count gives %d", got, total)
	}

	// Finished items by label: as of the refit, as the items and consensus
	// tables then stood.
	sum, _, err := e.store.ProjectSummary(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := text(doc, "#by-label caption .as-of"), "as of the last refit at "+fmtTime(sum.FittedAt); got != want {
		t.Errorf("by-label caption %q, want %q", got, want)
	}
	wantLabels := queryStrings(t, pool, `SELECT t.name || ' (' || t.key || '): ' || count(*) || ' items, ' || coalesce(sum(i.vote_count), 0) || ' votes'
		FROM items i JOIN consensus c ON c.item_id = i.id JOIN taxonomy_nodes t ON t.id = c.label_id
		WHERE i.project_id = $1 AND i.status = 'done' GROUP BY t.key, t.name ORDER BY t.key`, p.ID)
	var gotLabels []string
	doc.Find("#by-label tbody tr").Each(func(_ int, r *goquery.Selection) {
		cell := func(i int) string { return strings.TrimSpace(r.Find("td").Eq(i).Text()) }
		gotLabels = append(gotLabels, cell(0)+": "+cell(1)+" items, "+cell(2)+" votes")
	})
	if len(wantLabels) == 0 {
		t.Fatal("no finished items in the known project: the by-label check would check nothing")
	}
	if d := cmp.Diff(wantLabels, gotLabels); d != "" {
		t.Errorf("finished items by label (-tables after the refit +page):\n%s", d)
	}

	doc = page(t, lead.get("/lead/p/"+p.Slug+"/progress"), http.StatusOK)
	// The pace counts the whole hours that start within the last 24 hours.
	first := now.Add(-paceWindow).Truncate(time.Hour)
	if first.Before(now.Add(-paceWindow)) {
		first = first.Add(time.Hour)
	}
	var recent int
	pool.QueryRow(ctx, `SELECT count(*) FROM votes WHERE project_id = $1 AND created_at >= $2`, p.ID, first).Scan(&recent)
	if got, want := text(doc, "#fig-pace .value"), strconv.FormatFloat(float64(recent)/24, 'f', 1, 64)+" votes/h"; got != want {
		t.Errorf("pace %q, a full count gives %q", got, want)
	}
}

// queryStrings runs a query of one text column and returns its rows.
func queryStrings(t *testing.T, pool interface {
	Query(context.Context, string, ...any) (pgx.Rows, error)
}, sql string, args ...any) []string {
	t.Helper()
	rows, err := pool.Query(context.Background(), sql, args...)
	if err != nil {
		t.Fatalf("%s: %v", sql, err)
	}
	out, err := pgx.CollectRows(rows, pgx.RowTo[string])
	if err != nil {
		t.Fatalf("%s: %v", sql, err)
	}
	return out
}
