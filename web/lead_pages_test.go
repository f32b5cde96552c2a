package web

import (
	"context"
	"encoding/csv"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/concord-labs/concord/agreement"
	"github.com/concord-labs/concord/store"
)

// knownProject is a small project whose votes are known, fitted once by
// the engine, for checking the pages' numbers against agreement's.
type knownProject struct {
	p         store.Project
	items     []int64
	labellers []store.User
	votes     *agreement.Votes // the same votes, dense, for agreement.Fleiss
}

// knownVotes: 3 labellers on 6 items (rows), labels by key; "" is no vote.
var knownVotes = [][3]string{
	{"glass", "glass", "glass"},
	{"glass", "glass", "pet-bottle"},
	{"pet-bottle", "pet-bottle", "pet-bottle"},
	{"pet-bottle", "plastic-film", "pet-bottle"},
	{"plastic-film", "plastic-film", "plastic-film"},
	{"glass", "pet-bottle", ""},
}

func (e *testEnv) knownProject() knownProject {
	e.t.Helper()
	b := agreement.NewBuilder()
	rows := make([][]string, len(knownVotes))
	for i := range knownVotes {
		rows[i] = knownVotes[i][:]
	}
	k := knownProject{}
	k.p, k.items, k.labellers = e.votedProject(rows, 3, b,
		func(_ store.User, j int) string { return strconv.Itoa(j) },
		func(_, j int) float64 { return float64(3 + j) })
	k.votes = b.Build()
	return k
}

// votedProject makes a project with n labellers whose votes are rows (the
// label key of labeller j on item i; "" is no vote), adds each vote to b
// too, under the name name gives the labeller, and has the engine fit it
// once. Vote i, j is cast i*10+j minutes ago and took seconds(i, j).
func (e *testEnv) votedProject(rows [][]string, n int, b *agreement.Builder, name func(u store.User, j int) string, seconds func(i, j int) float64) (store.Project, []int64, []store.User) {
	e.t.Helper()
	ctx := context.Background()
	p := e.project()
	items := e.items(p, len(rows))
	labels := e.labelIDs(p)
	var labellers []store.User
	for range n {
		u := e.user(store.RoleLabeller)
		if err := e.store.AddMember(ctx, p.ID, u.ID); err != nil {
			e.t.Fatal(err)
		}
		labellers = append(labellers, u)
	}
	now := time.Now()
	for i, row := range rows {
		for j, key := range row {
			if key == "" {
				continue
			}
			_, err := e.store.Pool().Exec(ctx, `
				INSERT INTO votes (id, project_id, item_id, labeller_id, label_id, seconds, created_at)
				VALUES (gen_random_uuid(), $1, $2, $3, $4, $5, $6)`,
				p.ID, items[i], labellers[j].ID, labels[key], seconds(i, j), now.Add(-time.Duration(i*10+j)*time.Minute))
			if err != nil {
				e.t.Fatal(err)
			}
			if _, err := b.Add(strconv.Itoa(i), name(labellers[j], j), key, seconds(i, j)); err != nil {
				e.t.Fatal(err)
			}
		}
	}
	if _, err := e.store.Pool().Exec(ctx, `
		UPDATE items i SET vote_count = (SELECT count(label_id) FROM votes v WHERE v.item_id = i.id), status = 'needs_votes'
		WHERE project_id = $1`, p.ID); err != nil {
		e.t.Fatal(err)
	}
	if err := e.srv.RefitProject(ctx, p.ID); err != nil {
		e.t.Fatal(err)
	}
	return p, items, labellers
}

func TestAgreementPageMatchesFleiss(t *testing.T) {
	e := newTestEnv(t)
	lead := e.login(e.user(store.RoleLead))
	empty := e.project()
	doc := page(t, lead.get("/lead/p/"+empty.Slug+"/agreement"), http.StatusOK)
	if !strings.Contains(text(doc, "#not-computed"), "not computed yet") {
		t.Errorf("before a fit: %q", text(doc, "main"))
	}

	k := e.knownProject()
	want, err := agreement.Fleiss(k.votes)
	if err != nil {
		t.Fatal(err)
	}
	doc = page(t, lead.get("/lead/p/"+k.p.Slug+"/agreement"), http.StatusOK)
	if got := text(doc, "#fig-fleiss .value"); got != fmtStat3(want.Kappa) {
		t.Errorf("kappa shown %q, agreement.Fleiss gives %s", got, fmtStat3(want.Kappa))
	}
	band, _ := agreement.LandisKoch(want.Kappa)
	if got := text(doc, "#fig-fleiss .band"); got != band.Name {
		t.Errorf("band %q, want %q", got, band.Name)
	}
	if !strings.Contains(doc.Find(".source").Text(), agreement.LandisKochSource) {
		t.Error("page does not name the published source of the bands")
	}
	if n := doc.Find("svg#confusion-chart").Length(); n != 1 {
		t.Errorf("%d confusion heatmaps", n)
	}
	if got := doc.Find("#kappa-by-label tbody tr").Length(); got == 0 {
		t.Error("no per-label kappa rows")
	}
}

func TestProgressPage(t *testing.T) {
	e := newTestEnv(t)
	lead := e.login(e.user(store.RoleLead))
	k := e.knownProject()
	counts, err := e.store.ProjectStatusCounts(context.Background(), k.p.ID)
	if err != nil {
		t.Fatal(err)
	}
	doc := page(t, lead.get("/lead/p/"+k.p.Slug+"/progress"), http.StatusOK)
	for _, st := range store.ItemStatusOrder {
		if got := strings.TrimSpace(doc.Find("#status-" + st + " td").Eq(1).Text()); got != fmtInt(counts.ByStatus[st]) {
			t.Errorf("%s: page %q, store %d", st, got, counts.ByStatus[st])
		}
	}
	// 17 votes, all within the last 24 hours.
	if got := text(doc, "#fig-pace .value"); got != strconv.FormatFloat(17.0/24, 'f', 1, 64)+" votes/h" {
		t.Errorf("pace = %q", got)
	}
	if got := text(doc, "#fig-active-today .value"); got != "3" && time.Now().UTC().Hour() >= 1 {
		t.Errorf("active today = %q, want 3", got)
	}
	if doc.Find("svg#status-chart title").First().Text() != "Items by status" || doc.Find("svg#pace-chart").Length() != 1 {
		t.Error("charts missing")
	}
	empty := e.project()
	doc = page(t, lead.get("/lead/p/"+empty.Slug+"/progress"), http.StatusOK)
	if got := text(doc, "#fig-finish .value"); got != "nothing left" {
		t.Errorf("empty project finish = %q", got)
	}
}

func TestFinishEstimate(t *testing.T) {
	if got := finishEstimate(100, 0); got != 0 {
		t.Errorf("no pace: %v", got)
	}
	if got := finishEstimate(120, 60); got != 2*time.Hour {
		t.Errorf("120 votes at 60/h = %v, want 2h", got)
	}
}

func TestLabellersPageAndStatus(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	lead := e.login(e.user(store.RoleLead))
	k := e.knownProject()
	doc := page(t, lead.get("/lead/p/"+k.p.Slug+"/labellers"), http.StatusOK)
	for j, u := range k.labellers {
		want := 0
		for _, row := range knownVotes {
			if row[j] != "" {
				want++
			}
		}
		got := strings.TrimSpace(doc.Find(`tr[data-login="` + u.Login + `"] td.votes`).Text())
		if got != strconv.Itoa(want) {
			t.Errorf("%s votes %q, want %d", u.Login, got, want)
		}
	}
	u := k.labellers[0]
	resp := lead.postForm("/lead/p/"+k.p.Slug+"/labellers/"+i64(u.ID)+"/status", url.Values{"status": {"paused"}})
	if resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("pause: %d", resp.StatusCode)
	}
	if m, _ := e.store.MemberOf(ctx, k.p.ID, u.ID); m.Status != "paused" {
		t.Errorf("status after pause = %q", m.Status)
	}
	if resp := lead.postForm("/lead/p/"+k.p.Slug+"/labellers/"+i64(u.ID)+"/status", url.Values{"status": {"gone"}}); resp.StatusCode != http.StatusBadRequest {
		t.Errorf("bad status: %d", resp.StatusCode)
	}
	doc = page(t, lead.get("/lead/p/"+k.p.Slug+"/labellers/"+i64(u.ID)), http.StatusOK)
	if got := doc.Find("#recent-votes tbody tr").Length(); got != 6 {
		t.Errorf("%d recent votes, want 6", got)
	}
	if doc.Find("svg#labeller-confusion").Length() != 1 {
		t.Error("no confusion heatmap after a fit")
	}
	if resp := lead.get("/lead/p/" + k.p.Slug + "/labellers/99999999"); resp.StatusCode != http.StatusNotFound {
		t.Errorf("unknown labeller: %d", resp.StatusCode)
	}
}

func TestItemsAndLeadDecision(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	lead := e.login(e.user(store.RoleLead))
	k := e.knownProject()
	e.store.Pool().Exec(ctx, `UPDATE items SET status = 'review' WHERE id = $1`, k.items[5])
	doc := page(t, lead.get("/lead/p/"+k.p.Slug+"/items"), http.StatusOK)
	if first := doc.Find("#items tbody tr").First().AttrOr("data-id", ""); first != i64(k.items[5]) {
		t.Errorf("first row %s, want the review item %d", first, k.items[5])
	}
	if n := doc.Find("#items tbody tr").Length(); n != 6 {
		t.Errorf("%d rows, want 6", n)
	}
	doc = page(t, lead.get("/lead/p/"+k.p.Slug+"/items?status=done&gold=on"), http.StatusOK)
	if n := doc.Find("#items tbody tr").Length(); n != 0 {
		t.Errorf("done gold items: %d rows, want 0", n)
	}
	page(t, lead.get("/lead/p/"+k.p.Slug+"/items?min_conf=2"), http.StatusBadRequest)

	item := "/lead/p/" + k.p.Slug + "/items/" + i64(k.items[5])
	doc = page(t, lead.get(item), http.StatusOK)
	if n := doc.Find("#votes tbody tr").Length(); n != 2 {
		t.Errorf("%d votes on item page, want 2", n)
	}
	labels := e.labelIDs(k.p)
	if resp := lead.postForm(item+"/label", url.Values{"label": {i64(labels["plastic"])}}); resp.StatusCode != http.StatusBadRequest {
		t.Errorf("inner label: %d, want 400", resp.StatusCode)
	}
	resp := lead.postForm(item+"/label", url.Values{"label": {i64(labels["glass"])}})
	if resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("decide: %d", resp.StatusCode)
	}
	doc = page(t, lead.get(resp.Header.Get("Location")), http.StatusOK)
	if text(doc, "#fig-status .value") != "done" || text(doc, "#fig-consensus .value") != "glass" || !strings.Contains(text(doc, "#fig-gold .what"), "lead") {
		t.Errorf("after decision: %q / %q / %q", text(doc, "#fig-status"), text(doc, "#fig-consensus"), text(doc, "#fig-gold"))
	}
	if g, _ := e.store.GoldLabels(ctx, k.p.ID); g[k.items[5]] != labels["glass"] {
		t.Errorf("gold after decision = %v", g)
	}
}

func TestCostPage(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	lead := e.login(e.user(store.RoleLead))
	k := e.knownProject()
	p := k.p
	p.Pay = store.PayModel{Model: store.PayPerVote, Rate: 0.05, Currency: "EUR", BudgetCap: ptr(0.5), MinHourlyPay: ptr(50.0)}
	if _, err := e.store.UpdateProject(ctx, p); err != nil {
		t.Fatal(err)
	}
	doc := page(t, lead.get("/lead/p/"+p.Slug+"/cost"), http.StatusOK)
	// 17 votes at 0.05 EUR.
	if got := text(doc, "#fig-spend .value"); got != "0.85 EUR" {
		t.Errorf("spend = %q, want 0.85 EUR", got)
	}
	if doc.Find("#over-budget").Length() != 1 {
		t.Error("no budget warning though 0.85 EUR spent > 0.50 EUR cap")
	}
	if !strings.Contains(text(doc, "#law"), "Local labour law decides the real minimum wage") {
		t.Error("no labour-law caution")
	}
	// Labeller 0 took 3 s a vote: 6 votes x 0.05 EUR in 18 s = 60 EUR/h, above 50.
	// Labeller 2 took 5 s: 5 votes x 0.05 in 25 s = 36 EUR/h, below 50.
	for j, want := range map[int]string{0: "60.00 EUR per hour", 2: "36.00 EUR per hour"} {
		row := doc.Find(`#pay tr[data-login="` + k.labellers[j].Login + `"]`)
		if got := strings.TrimSpace(row.Find("td.hourly").Text()); got != want {
			t.Errorf("labeller %d hourly %q, want %q", j, got, want)
		}
		if below := row.Find(".below").Length() == 1; below != (j == 2) {
			t.Errorf("labeller %d below-minimum flag = %v", j, below)
		}
	}
	resp := lead.get("/lead/p/" + p.Slug + "/cost.csv")
	if resp.StatusCode != http.StatusOK || !strings.HasPrefix(resp.Header.Get("Content-Type"), "text/csv") {
		t.Fatalf("csv: %d %s", resp.StatusCode, resp.Header.Get("Content-Type"))
	}
	recs, err := csv.NewReader(resp.Body).ReadAll()
	if err != nil || len(recs) != 4 || recs[0][3] != "pay_EUR" {
		t.Fatalf("csv = %v, %v", recs, err)
	}
}

func ptr[T any](v T) *T { return &v }

func TestComputeCostPerHour(t *testing.T) {
	p := &store.Project{Pay: store.PayModel{Model: store.PayPerHour, Rate: 18, Currency: "EUR"}}
	work := []store.LabellerWork{{User: store.User{Login: "a"}, Votes: 100, Seconds: 1800}, {User: store.User{Login: "b"}, Votes: 50, Seconds: 1800}}
	counts := store.StatusCounts{ByStatus: map[string]int{"done": 30}, VotesNeeded: 150}
	sum := &store.ProjectSummary{FinishedItems: 30, FinishedVotes: 120, FixedVotesPerItem: 7}
	d := computeCost(p, work, counts, sum)
	// One hour recorded at 18 EUR/h; 150 votes took 3600 s, so one vote costs 24 s = 0.12 EUR.
	near := func(a, b float64) bool { return math.Abs(a-b) < 1e-9 }
	if !near(d.Spend, 18) || !near(*d.PerItem, 0.6) || !near(*d.PerVote, 0.12) || !near(*d.Projected, 18+150*0.12) {
		t.Errorf("spend %v, per item %v, per vote %v, projected %v", d.Spend, *d.PerItem, *d.PerVote, *d.Projected)
	}
	if d.SavedVotes != 30*7-120 || !near(*d.SavedMoney, 90*0.12) {
		t.Errorf("saved %d votes, %v EUR", d.SavedVotes, *d.SavedMoney)
	}
}

// TestLeadPagesRefuseLabellers: every lead page and action answers 403 to
// a labeller, even one who is a member of the project.
func TestLeadPagesRefuseLabellers(t *testing.T) {
	e := newTestEnv(t)
	p := e.project()
	lab := e.user(store.RoleLabeller)
	e.store.AddMember(context.Background(), p.ID, lab.ID)
	c := e.login(lab)
	base := "/lead/p/" + p.Slug
	for _, path := range []string{"/lead/projects", "/lead/projects/new", base, base + "/setup", base + "/progress",
		base + "/agreement", base + "/labellers", base + "/labellers/" + i64(lab.ID), base + "/items", base + "/items/1",
		base + "/cost", base + "/cost.csv", base + "/releases", base + "/releases/r1/download"} {
		if resp := c.get(path); resp.StatusCode != http.StatusForbidden {
			t.Errorf("GET %s: %d, want 403", path, resp.StatusCode)
		}
	}
	for _, path := range []string{"/lead/projects", base + "/setup/taxonomy", base + "/setup/policy", base + "/setup/pay",
		base + "/setup/gold", base + "/setup/images", base + "/setup/import", base + "/labellers/" + i64(lab.ID) + "/status",
		base + "/items/1/label", base + "/releases"} {
		if resp := c.postForm(path, url.Values{"status": {"active"}}); resp.StatusCode != http.StatusForbidden {
			t.Errorf("POST %s: %d, want 403", path, resp.StatusCode)
		}
	}
}
