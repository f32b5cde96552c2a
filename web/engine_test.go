package web

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/http"
	"strconv"
	"strings"
	"testing"

	"github.com/concord-labs/concord/agreement"
	"github.com/concord-labs/concord/store"
)

// castVote claims item for labeller u (as the claim query would) and
// records a vote through the same path as the API.
func castVote(t *testing.T, e *testEnv, p *store.Project, u store.User, item int64, label *int64, n int) {
	t.Helper()
	ctx := context.Background()
	_, err := e.store.Pool().Exec(ctx, `INSERT INTO claims (item_id, labeller_id, project_id, expires_at)
		VALUES ($1, $2, $3, now() + interval '5 minutes') ON CONFLICT DO NOTHING`, item, u.ID, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	_, err = e.store.RecordVote(ctx, store.NewVote{ID: fmt.Sprintf("22222222-0000-4000-8000-%012d", n), ProjectID: p.ID,
		ItemID: item, LabellerID: u.ID, LabelID: label, Seconds: 2}, e.srv.decider(p))
	if err != nil {
		t.Fatal(err)
	}
}

func TestRefitProject(t *testing.T) {
	ctx := context.Background()
	e := newTestEnv(t)
	proj := e.project()
	p := &proj
	ids := e.drawnItems(proj, 40)
	lab := e.labelIDs(proj)
	keys := []string{"pet-bottle", "plastic-film", "glass"}
	var us []store.User
	for range 4 {
		us = append(us, e.member(proj))
	}
	// Items 0-9 are gold; the rest have a true label cycling through keys.
	for i := range 10 {
		if err := e.store.SetGoldAnswer(ctx, p.ID, ids[i], lab[keys[i%3]], store.GoldSourceGold, nil); err != nil {
			t.Fatal(err)
		}
	}
	n := 0
	b := agreement.NewBuilder()
	for i, id := range ids {
		truth := keys[i%3]
		for l, u := range us {
			label := truth
			switch {
			case l == 3 && i < 10:
				label = keys[(i+1)%3] // the fourth labeller gets every gold item wrong
			case l == 2 && i%5 == 0:
				label = keys[(i+2)%3] // the third slips now and then
			}
			n++
			lid := lab[label]
			castVote(t, e, p, u, id, &lid, n)
			b.Add(strconv.FormatInt(id, 10), u.Login, label, 2)
		}
	}
	// Before the first fit the vote path uses majority vote.
	var method string
	if err := e.store.Pool().QueryRow(ctx, `SELECT method FROM consensus WHERE item_id = $1`, ids[20]).Scan(&method); err != nil || method != store.MethodMajority {
		t.Fatalf("consensus method before a fit = %q, %v; want mv", method, err)
	}

	if err := e.srv.RefitProject(ctx, p.ID); err != nil {
		t.Fatal(err)
	}
	sum, votesAtFit, err := e.store.ProjectSummary(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	if votesAtFit != 160 || sum.Votes != 160 || sum.Labellers != 4 || sum.Items != 40 || sum.Method != "ds" {
		t.Errorf("summary counts: votes %d/%d labellers %d items %d method %q", votesAtFit, sum.Votes, sum.Labellers, sum.Items, sum.Method)
	}
	// The summary's kappa is agreement.Fleiss on the same votes.
	want, err := agreement.Fleiss(b.Build())
	if err != nil {
		t.Fatal(err)
	}
	if sum.Fleiss.Value == nil || math.Abs(*sum.Fleiss.Value-want.Kappa) > 1e-12 {
		t.Errorf("summary Fleiss = %v, want %v", sum.Fleiss.Value, want.Kappa)
	}
	if sum.Fleiss.Low == nil || *sum.Fleiss.Low > want.Kappa || *sum.Fleiss.High < want.Kappa || sum.Fleiss.Band == "" {
		t.Errorf("Fleiss interval %v..%v band %q does not hold the estimate %v", sum.Fleiss.Low, sum.Fleiss.High, sum.Fleiss.Band, want.Kappa)
	}
	if len(sum.ByDepth) != 2 || sum.ByDepth[0].Labels != 2 || len(sum.Pairs) != 6 || len(sum.OverTime) != 1 || len(sum.Labels) != 3 {
		t.Errorf("summary shape: by depth %+v, %d pairs, %d days, labels %v", sum.ByDepth, len(sum.Pairs), len(sum.OverTime), sum.Labels)
	}

	// The fourth labeller is paused: 0 of 10 gold right.
	m, err := e.store.MemberOf(ctx, p.ID, us[3].ID)
	if err != nil || m.Status != store.StatusPaused || !strings.Contains(m.StatusReason, "0 of 10 gold items") {
		t.Errorf("fourth labeller: %q %q, %v; want paused with the gold figures", m.Status, m.StatusReason, err)
	}
	for _, u := range us[:3] {
		if m, _ := e.store.MemberOf(ctx, p.ID, u.ID); m.Status != store.StatusActive {
			t.Errorf("labeller %s is %s, want active", u.Login, m.Status)
		}
	}
	c := e.login(us[3])
	if resp := c.postJSON("/api/p/"+p.Slug+"/next", `{}`); resp.StatusCode != http.StatusForbidden {
		t.Errorf("paused labeller claims: %d, want 403", resp.StatusCode)
	}

	// A lead resumes them: the next fit, on the same evidence, leaves them
	// active; ten more gold items all wrong pause them again, on those ten.
	if err := e.store.SetMemberStatus(ctx, p.ID, us[3].ID, store.StatusActive, "talked it through"); err != nil {
		t.Fatal(err)
	}
	if err := e.srv.RefitProject(ctx, p.ID); err != nil {
		t.Fatal(err)
	}
	if m, _ := e.store.MemberOf(ctx, p.ID, us[3].ID); m.Status != store.StatusActive {
		t.Errorf("resumed labeller after a refit on the same gold answers: %s (%q), want active", m.Status, m.StatusReason)
	}
	more := e.drawnItems(proj, 10)
	for i, id := range more {
		if err := e.store.SetGoldAnswer(ctx, p.ID, id, lab[keys[i%3]], store.GoldSourceGold, nil); err != nil {
			t.Fatal(err)
		}
		wrong := lab[keys[(i+1)%3]]
		n++
		castVote(t, e, p, us[3], id, &wrong, n)
	}
	if err := e.srv.RefitProject(ctx, p.ID); err != nil {
		t.Fatal(err)
	}
	if m, _ := e.store.MemberOf(ctx, p.ID, us[3].ID); m.Status != store.StatusPaused ||
		!strings.Contains(m.StatusReason, "0 of 10 gold items right since your lead last set your status") {
		t.Errorf("resumed labeller after ten more wrong gold answers: %s (%q), want paused on those ten", m.Status, m.StatusReason)
	}
	if err := e.store.SetMemberStatus(ctx, p.ID, us[3].ID, store.StatusActive, "second chance"); err != nil {
		t.Fatal(err)
	}

	// The vote path's posterior for an item, from the stored matrices, is
	// the fit's own posterior: the E-step with the fitted parameters.
	var post []float64
	var labels []int64
	if err := e.store.Pool().QueryRow(ctx, `SELECT method, posterior_labels, posterior FROM consensus WHERE item_id = $1`, ids[25]).
		Scan(&method, &labels, &post); err != nil || method != store.MethodDS {
		t.Fatalf("consensus after the fit: %q, %v", method, err)
	}
	var fitted = sum.FittedAt
	iv := store.ItemVotes{ProjectID: p.ID, ItemID: ids[25], FittedAt: fitted}
	if err := e.store.Pool().QueryRow(ctx, `SELECT array_agg(labeller_id ORDER BY created_at), array_agg(label_id ORDER BY created_at)
		FROM votes WHERE item_id = $1`, ids[25]).Scan(&iv.Labellers, &iv.Labels); err != nil {
		t.Fatal(err)
	}
	iv.VoteCount = len(iv.Labels)
	iv.LoadModel = func() (store.ProjectModel, error) { return e.store.ProjectModel(ctx, p.ID) }
	up, err := e.srv.decider(p)(ctx, iv)
	if err != nil || up.Consensus == nil || up.Consensus.Method != store.MethodDS {
		t.Fatalf("online decision = %+v, %v", up, err)
	}
	if len(up.Consensus.Posterior) != len(post) {
		t.Fatalf("online posterior %v over %v, fit %v over %v", up.Consensus.Posterior, up.Consensus.PosteriorLabels, post, labels)
	}
	for i := range post {
		if math.Abs(up.Consensus.Posterior[i]-post[i]) > 1e-4 || up.Consensus.PosteriorLabels[i] != labels[i] {
			t.Errorf("online posterior %v over %v, fit %v over %v", up.Consensus.Posterior, up.Consensus.PosteriorLabels, post, labels)
			break
		}
	}
	var status string
	e.store.Pool().QueryRow(ctx, `SELECT status FROM items WHERE id = $1`, ids[25]).Scan(&status)
	if status != "done" {
		t.Errorf("item with three of four votes agreeing is %q, want done", status)
	}
}

func TestRefitIsExclusive(t *testing.T) {
	ctx := context.Background()
	e := newTestEnv(t)
	p := e.project()
	held := make(chan struct{})
	release := make(chan struct{})
	go e.store.WithProjectLock(ctx, p.ID, func(context.Context) error {
		close(held)
		<-release
		return nil
	})
	<-held
	// Another server process (here: another Server on the same database).
	other := New(e.store, nil, Config{DataDir: t.TempDir()})
	if err := other.RefitProject(ctx, p.ID); !errors.Is(err, ErrRefitBusy) {
		t.Errorf("refit while another holds the lock: %v, want ErrRefitBusy", err)
	}
	close(release)
}

func TestGoldMixing(t *testing.T) {
	ctx := context.Background()
	e := newTestEnv(t)
	proj := e.project()
	proj.Policy.GoldRate = 0.3
	proj.Policy.GoldFeedback = true
	proj, err := e.store.UpdateProject(ctx, proj)
	if err != nil {
		t.Fatal(err)
	}
	ids := e.drawnItems(proj, 300)
	glass := e.labelIDs(proj)["glass"]
	gold := map[int64]bool{}
	for _, id := range ids[:100] {
		if err := e.store.SetGoldAnswer(ctx, proj.ID, id, glass, store.GoldSourceGold, nil); err != nil {
			t.Fatal(err)
		}
		gold[id] = true
	}
	c := e.login(e.member(proj))
	next := apiResult(t, c.postJSON("/api/p/"+proj.Slug+"/next", `{}`), http.StatusOK).Next
	const rounds = 150
	hits, feedback := 0, 0
	for i := range rounds {
		if gold[next.ID] {
			hits++
		}
		r := apiResult(t, c.postJSON("/api/p/"+proj.Slug+"/votes", voteBody(uuidN(1000+i), next.ID, "pet-bottle")), http.StatusOK)
		if r.Feedback != nil {
			feedback++
			if r.Feedback.Correct || r.Feedback.Expected != "glass" {
				t.Errorf("feedback %+v, want wrong, expected glass", r.Feedback)
			}
		}
		next = r.Next
	}
	// 150 draws at 0.3: mean 45, standard deviation 5.6; 25..65 is
	// about 3.5 standard deviations either side.
	if hits < 25 || hits > 65 {
		t.Errorf("%d gold items in %d, want about %d", hits, rounds, rounds*3/10)
	}
	if feedback != hits {
		t.Errorf("feedback after %d of %d gold items", feedback, hits)
	}
}
