package store_test

import (
	"context"
	"crypto/sha256"
	"errors"
	"testing"
	"time"

	"github.com/google/go-cmp/cmp"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/taxonomy"
)

func ptr[T any](v T) *T { return &v }

func TestAutoPause(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ana, ben := f.labellers[0], f.labellers[1]
	if err := f.s.SetMemberStatus(ctx, f.project.ID, ben.ID, store.StatusPaused, "lead: on a break"); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name       string
		user       int64
		reason     string
		wantPaused bool
		// membership afterwards; "" for a non-member
		wantStatus, wantReason string
	}{
		{"active member is paused", ana.ID, "gold accuracy 0.40 below floor 0.60", true, store.StatusPaused, "gold accuracy 0.40 below floor 0.60"},
		// A second auto-pause must not overwrite the first reason.
		{"already paused by the engine", ana.ID, "another reason", false, store.StatusPaused, "gold accuracy 0.40 below floor 0.60"},
		{"paused by a lead", ben.ID, "gold accuracy low", false, store.StatusPaused, "lead: on a break"},
		{"not a member", f.lead.ID, "gold accuracy low", false, "", ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := f.s.AutoPause(ctx, f.project.ID, c.user, c.reason)
			if err != nil || got != c.wantPaused {
				t.Fatalf("AutoPause = %v, %v; want %v", got, err, c.wantPaused)
			}
			m, err := f.s.MemberOf(ctx, f.project.ID, c.user)
			if c.wantStatus == "" {
				if !errors.Is(err, store.ErrNotFound) {
					t.Errorf("non-member after AutoPause: %+v, %v; want ErrNotFound", m, err)
				}
				return
			}
			if err != nil || m.Status != c.wantStatus || m.StatusReason != c.wantReason {
				t.Errorf("member = %q %q, %v; want %q %q", m.Status, m.StatusReason, err, c.wantStatus, c.wantReason)
			}
		})
	}
	// A blocked member stays blocked.
	if err := f.s.SetMemberStatus(ctx, f.project.ID, ana.ID, store.StatusBlocked, "lead: spam"); err != nil {
		t.Fatal(err)
	}
	if got, err := f.s.AutoPause(ctx, f.project.ID, ana.ID, "gold"); err != nil || got {
		t.Errorf("AutoPause of a blocked member = %v, %v; want false", got, err)
	}
	if m, _ := f.s.MemberOf(ctx, f.project.ID, ana.ID); m.Status != store.StatusBlocked || m.StatusReason != "lead: spam" {
		t.Errorf("blocked member became %q %q", m.Status, m.StatusReason)
	}
}

func TestLoginFailuresCountClearAndExpire(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	// Logins and addresses unique to this fixture, as the table is shared.
	login, other := f.lead.Login, f.labellers[0].Login
	addrA, addrB := "192.0.2.1/"+f.project.Slug, "192.0.2.2/"+f.project.Slug
	for _, r := range []struct{ login, addr string }{
		{login, addrA}, {login, addrA}, {login, addrA}, {login, addrB}, {other, addrA},
	} {
		if err := f.s.RecordLoginFailure(ctx, r.login, r.addr); err != nil {
			t.Fatal(err)
		}
	}
	// Move one of login's failures from addrA two hours back.
	f.exec(t, `UPDATE login_failures SET at = now() - interval '2 hours'
		WHERE id = (SELECT min(id) FROM login_failures WHERE login = $1 AND address = $2)`, login, addrA)
	check := func(name, login, addr string, since time.Time, wantLogin, wantAddr int) {
		t.Helper()
		l, a, err := f.s.LoginFailures(ctx, login, addr, since)
		if err != nil || l != wantLogin || a != wantAddr {
			t.Errorf("%s: LoginFailures = %d by login, %d by address, %v; want %d, %d", name, l, a, err, wantLogin, wantAddr)
		}
	}
	now := time.Now()
	// login: 3 from addrA + 1 from addrB; addrA: 3 of login + 1 of other.
	check("last 3 hours", login, addrA, now.Add(-3*time.Hour), 4, 4)
	// The one moved back drops out of both counts.
	check("last hour", login, addrA, now.Add(-time.Hour), 3, 3)
	check("other address", other, addrB, now.Add(-time.Hour), 1, 1)

	if err := f.s.ClearLoginFailures(ctx, login); err != nil {
		t.Fatal(err)
	}
	// Only other's failure from addrA is left.
	check("after clear", login, addrA, now.Add(-3*time.Hour), 0, 1)
	check("other untouched", other, addrB, now.Add(-3*time.Hour), 1, 0)

	// DeleteExpiredSessions drops failures older than keep only.
	f.exec(t, `UPDATE login_failures SET at = now() - interval '30 hours' WHERE login = $1`, other)
	if err := f.s.RecordLoginFailure(ctx, other, addrB); err != nil {
		t.Fatal(err)
	}
	if _, err := f.s.DeleteExpiredSessions(ctx, 24*time.Hour); err != nil {
		t.Fatal(err)
	}
	check("after purge", other, addrA, now.Add(-48*time.Hour), 1, 0)
}

func TestDeleteSessions(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	// Other tests leave expired sessions behind; clear them so the count
	// below is this test's.
	if _, err := f.s.DeleteExpiredSessions(ctx, 24*time.Hour); err != nil {
		t.Fatal(err)
	}
	hash := func(s string) []byte { h := sha256.Sum256([]byte(f.project.Slug + s)); return h[:] }
	live1, live2, dead1, dead2 := hash("live1"), hash("live2"), hash("dead1"), hash("dead2")
	for _, h := range [][]byte{live1, live2, dead1, dead2} {
		if err := f.s.CreateSession(ctx, h, f.labellers[0].ID, time.Now().Add(time.Hour)); err != nil {
			t.Fatal(err)
		}
	}
	f.exec(t, `UPDATE sessions SET created_at = now() - interval '2 hours', expires_at = now() - interval '1 second'
		WHERE id_hash = ANY($1)`, [][]byte{dead1, dead2})
	n, err := f.s.DeleteExpiredSessions(ctx, 24*time.Hour)
	if err != nil || n != 2 {
		t.Fatalf("DeleteExpiredSessions = %d, %v; want the 2 expired", n, err)
	}
	left := func() map[string]bool {
		rows, err := f.s.Pool().Query(ctx, `SELECT id_hash FROM sessions WHERE id_hash = ANY($1)`, [][]byte{live1, live2, dead1, dead2})
		if err != nil {
			t.Fatal(err)
		}
		defer rows.Close()
		out := map[string]bool{}
		for rows.Next() {
			var h []byte
			if err := rows.Scan(&h); err != nil {
				t.Fatal(err)
			}
			out[string(h)] = true
		}
		return out
	}
	if got := left(); len(got) != 2 || !got[string(live1)] || !got[string(live2)] {
		t.Errorf("after purge %d sessions left, want live1 and live2", len(got))
	}

	if err := f.s.DeleteSession(ctx, live1); err != nil {
		t.Fatal(err)
	}
	if _, err := f.s.SessionUser(ctx, live1); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("deleted session: %v, want ErrNotFound", err)
	}
	if u, err := f.s.SessionUser(ctx, live2); err != nil || u.ID != f.labellers[0].ID {
		t.Errorf("other session after logout: %d, %v", u.ID, err)
	}
	if err := f.s.DeleteSession(ctx, live1); err != nil {
		t.Errorf("deleting a missing session: %v, want nil", err)
	}
	if got := left(); len(got) != 1 || !got[string(live2)] {
		t.Errorf("after logout %d sessions left, want live2 only", len(got))
	}
}

func TestLabellerStatsReadBack(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ana, ben := f.labellers[0], f.labellers[1]
	// Someone with figures who is not a member: a labeller who left.
	gone, err := f.s.CreateUser(ctx, store.User{Login: "gone-" + f.project.Slug, DisplayName: "gone", Role: store.RoleLabeller})
	if err != nil {
		t.Fatal(err)
	}
	stranger, err := f.s.CreateUser(ctx, store.User{Login: "stranger-" + f.project.Slug, DisplayName: "x", Role: store.RoleLabeller})
	if err != nil {
		t.Fatal(err)
	}
	glass, pet := f.labels["glass"].ID, f.labels["pet-bottle"].ID
	model := &store.LabellerModel{Labels: []string{"glass", "pet-bottle"}, Counts: [][]float64{{8, 2}, {1, 9}},
		Classes: []int64{glass, pet}, Prior: []float64{0.5, 0.5}, Matrix: []float64{0.8, 0.2, 0.1, 0.9}}
	anaFig := store.LabellerFigures{Votes: 20, MedianSeconds: ptr(3.5), Accuracy: ptr(0.85), GoldCorrect: 7, GoldTotal: 9,
		GoldLow: ptr(0.45), GoldHigh: ptr(0.97), Agreement: ptr(0.8), Flags: []string{"fast"}}
	goneFig := store.LabellerFigures{Votes: 5, Accuracy: ptr(0.4), Flags: []string{}}

	if _, err := f.s.ProjectModel(ctx, f.project.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("ProjectModel before a fit: %v, want ErrNotFound", err)
	}
	err = f.s.SaveLabellerStats(ctx, f.project.ID, []store.LabellerStats{
		{UserID: ana.ID, LabellerFigures: anaFig, Model: model},
		{UserID: gone.ID, LabellerFigures: goneFig},
	})
	if err != nil {
		t.Fatal(err)
	}

	rows, err := f.s.LabellerRows(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	type row struct {
		Login          string
		Member         bool
		Status, Reason string
		Fig            store.LabellerFigures
		HasStats       bool
	}
	var got []row
	for _, r := range rows {
		got = append(got, row{r.User.Login, r.Member, r.Status, r.StatusReason, r.LabellerFigures, r.StatsAt != nil})
	}
	// Most votes first: ana 20, gone 5, ben 0 (no figures yet; flags read as empty).
	want := []row{
		{ana.Login, true, store.StatusActive, "", anaFig, true},
		{gone.Login, false, "", "", goneFig, true},
		{ben.Login, true, store.StatusActive, "", store.LabellerFigures{Flags: []string{}}, false},
	}
	if d := cmp.Diff(want, got); d != "" {
		t.Errorf("LabellerRows (-want +got):\n%s", d)
	}
	one, err := f.s.LabellerRowOf(ctx, f.project.ID, ana.ID)
	if err != nil || one.User.ID != ana.ID || !one.Member || one.StatsAt == nil {
		t.Fatalf("LabellerRowOf(ana) = %+v, %v", one, err)
	}
	if d := cmp.Diff(anaFig, one.LabellerFigures); d != "" {
		t.Errorf("LabellerRowOf(ana) figures (-want +got):\n%s", d)
	}
	if r, err := f.s.LabellerRowOf(ctx, f.project.ID, gone.ID); err != nil || r.Member || r.Votes != 5 {
		t.Errorf("LabellerRowOf(gone) = %+v, %v; want a non-member with 5 votes", r, err)
	}
	if _, err := f.s.LabellerRowOf(ctx, f.project.ID, stranger.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("LabellerRowOf(stranger): %v, want ErrNotFound", err)
	}

	conf, err := f.s.LabellerConfusion(ctx, f.project.ID, ana.ID)
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff(*model, conf); d != "" {
		t.Errorf("LabellerConfusion (-want +got):\n%s", d)
	}
	if _, err := f.s.LabellerConfusion(ctx, f.project.ID, gone.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("confusion of a labeller without a model: %v, want ErrNotFound", err)
	}

	// ProjectModel needs the fit's summary beside the figures.
	fitted := time.Date(2025, 3, 4, 9, 0, 0, 0, time.UTC)
	if err := f.s.SaveProjectSummary(ctx, f.project.ID, 25, store.ProjectSummary{FittedAt: fitted}); err != nil {
		t.Fatal(err)
	}
	pm, err := f.s.ProjectModel(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	if !pm.FittedAt.Equal(fitted) {
		t.Errorf("ProjectModel fitted at %v, want %v", pm.FittedAt, fitted)
	}
	if d := cmp.Diff(map[int64]float64{ana.ID: 0.85, gone.ID: 0.4}, pm.Accuracy); d != "" {
		t.Errorf("accuracy (-want +got):\n%s", d)
	}
	if d := cmp.Diff(map[int64]int{ana.ID: 20, gone.ID: 5}, pm.Votes); d != "" {
		t.Errorf("votes (-want +got):\n%s", d)
	}
	if d := cmp.Diff(map[int64]*store.LabellerModel{ana.ID: model}, pm.Models); d != "" {
		t.Errorf("models (-want +got):\n%s", d)
	}

	// A later fit overwrites a labeller's figures; the model can go.
	anaFig.Votes, anaFig.Accuracy, anaFig.Flags = 30, ptr(0.9), nil
	if err := f.s.SaveLabellerStats(ctx, f.project.ID, []store.LabellerStats{{UserID: ana.ID, LabellerFigures: anaFig}}); err != nil {
		t.Fatal(err)
	}
	one, err = f.s.LabellerRowOf(ctx, f.project.ID, ana.ID)
	if err != nil || one.Votes != 30 || *one.Accuracy != 0.9 || len(one.Flags) != 0 {
		t.Errorf("after the second save: %+v, %v; want 30 votes, accuracy 0.9, no flags", one.LabellerFigures, err)
	}
	if _, err := f.s.LabellerConfusion(ctx, f.project.ID, ana.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("confusion after a save without a model: %v, want ErrNotFound", err)
	}
}

func TestGoldMarks(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ana, ben := f.labellers[0], f.labellers[1]
	err := f.s.SaveLabellerStats(ctx, f.project.ID, []store.LabellerStats{
		{UserID: ana.ID, LabellerFigures: store.LabellerFigures{GoldCorrect: 7, GoldTotal: 9}},
		{UserID: ben.ID, LabellerFigures: store.LabellerFigures{GoldCorrect: 0, GoldTotal: 0}},
	})
	if err != nil {
		t.Fatal(err)
	}
	if m, err := f.s.GoldMarks(ctx, f.project.ID); err != nil || len(m) != 0 {
		t.Errorf("marks before any lead decision = %v, %v; want none", m, err)
	}
	for _, u := range []int64{ana.ID, ben.ID} {
		if err := f.s.SetMemberStatus(ctx, f.project.ID, u, store.StatusActive, "lead: resumed"); err != nil {
			t.Fatal(err)
		}
	}
	// The mark is ana's gold figures when the lead acted; ben had no gold
	// answers, so he has no mark.
	m, err := f.s.GoldMarks(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff(map[int64]store.GoldMark{ana.ID: {Correct: 7, Total: 9}}, m); d != "" {
		t.Errorf("GoldMarks (-want +got):\n%s", d)
	}
	// Later figures do not move the mark until the lead acts again.
	err = f.s.SaveLabellerStats(ctx, f.project.ID, []store.LabellerStats{
		{UserID: ana.ID, LabellerFigures: store.LabellerFigures{GoldCorrect: 8, GoldTotal: 12}},
	})
	if err != nil {
		t.Fatal(err)
	}
	if m, _ := f.s.GoldMarks(ctx, f.project.ID); m[ana.ID] != (store.GoldMark{Correct: 7, Total: 9}) {
		t.Errorf("mark after a refit = %+v, want 7 of 9", m[ana.ID])
	}
}

func TestWriteItemPlansAndItemStates(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 4)
	glass, pet := f.labels["glass"].ID, f.labels["pet-bottle"].ID
	f.exec(t, `UPDATE items SET vote_count = 2 WHERE id = $1`, ids[0])
	f.exec(t, `UPDATE items SET vote_count = 1 WHERE id = $1`, ids[1])
	if err := f.s.SetGoldAnswer(ctx, f.project.ID, ids[3], glass, store.GoldSourceGold, nil); err != nil {
		t.Fatal(err)
	}
	cons := &store.ConsensusRow{LabelID: &pet, Confidence: 0.97, Method: store.MethodDS, VoteCount: 2,
		PosteriorLabels: []int64{pet, glass}, Posterior: []float64{0.97, 0.03}}
	plans := []store.ItemPlanRow{
		{ItemID: ids[0], SeenVotes: 2, Status: "done", VotesNeeded: 0, Priority: 0, Consensus: cons},
		// The fit saw no votes, but one came in since: left alone.
		{ItemID: ids[1], SeenVotes: 0, Status: "needs_votes", VotesNeeded: 3, Priority: 0.9, Consensus: cons},
		{ItemID: ids[2], SeenVotes: 0, Status: "needs_votes", VotesNeeded: 3, Priority: 0.7},
		// A gold item's answer is fixed.
		{ItemID: ids[3], SeenVotes: 0, Status: "needs_votes", VotesNeeded: 2, Priority: 0.5, Consensus: cons},
	}
	n, err := f.s.WriteItemPlans(ctx, f.project.ID, plans)
	if err != nil || n != 2 {
		t.Fatalf("WriteItemPlans = %d, %v; want 2 (items 0 and 2)", n, err)
	}
	gotIDs, counts, statuses, err := f.s.ItemStates(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff(ids, gotIDs); d != "" {
		t.Errorf("ItemStates ids (by id):\n%s", d)
	}
	if d := cmp.Diff([]int{2, 1, 0, 0}, counts); d != "" {
		t.Errorf("ItemStates vote counts:\n%s", d)
	}
	if d := cmp.Diff([]string{"done", "unstarted", "needs_votes", "done"}, statuses); d != "" {
		t.Errorf("ItemStates statuses:\n%s", d)
	}
	type plan struct {
		Needed int
		Prio   float64
	}
	var gotPlans []plan
	rows, err := f.s.Pool().Query(ctx, `SELECT votes_needed, priority FROM items WHERE id = ANY($1) ORDER BY id`, ids)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var p plan
		if err := rows.Scan(&p.Needed, &p.Prio); err != nil {
			t.Fatal(err)
		}
		gotPlans = append(gotPlans, p)
	}
	rows.Close()
	// Item 1 keeps the schema defaults (votes_needed 1, priority 0, in
	// 0001_core); item 3 keeps SetGoldAnswer's 0, 0.
	if d := cmp.Diff([]plan{{0, 0}, {1, 0}, {3, 0.7}, {0, 0}}, gotPlans); d != "" {
		t.Errorf("votes needed and priority (-want +got):\n%s", d)
	}
	c, err := f.s.ConsensusOf(ctx, f.project.ID, ids[0])
	if err != nil || *c.LabelID != pet || c.Confidence != 0.97 || c.Method != store.MethodDS || c.VoteCount != 2 ||
		!cmp.Equal(c.PosteriorLabels, []int64{pet, glass}) || !cmp.Equal(c.Posterior, []float64{0.97, 0.03}) {
		t.Errorf("consensus of item 0 = %+v, %v", c.ConsensusRow, err)
	}
	if _, err := f.s.ConsensusOf(ctx, f.project.ID, ids[1]); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("consensus of the stale item: %v, want none", err)
	}
	if c, err := f.s.ConsensusOf(ctx, f.project.ID, ids[3]); err != nil || *c.LabelID != glass || c.Method != store.MethodGold {
		t.Errorf("gold item consensus = %+v, %v; want the gold glass", c.ConsensusRow, err)
	}
	// The same plans again change nothing.
	if n, err := f.s.WriteItemPlans(ctx, f.project.ID, plans); err != nil || n != 0 {
		t.Errorf("rewriting the same plans = %d, %v; want 0", n, err)
	}
}

func TestProjectVotesAndVoteViews(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 2)
	ana, ben := f.labellers[0], f.labellers[1]
	t0 := time.Date(2025, 3, 4, 8, 0, 0, 0, time.UTC)
	f.vote(t, ids[0], ben.ID, "pet-bottle", 6, t0.Add(time.Minute))
	f.vote(t, ids[0], ana.ID, "glass", 4, t0)
	f.vote(t, ids[1], ana.ID, "", 2, t0.Add(2*time.Minute))
	f.vote(t, ids[1], ben.ID, "glass", 5, t0.Add(3*time.Minute))
	glass, pet := f.labels["glass"].ID, f.labels["pet-bottle"].ID

	before := time.Now()
	v, err := f.s.ProjectVotes(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	if v.Len() != 3 {
		t.Errorf("Len = %d, want 3 labelled votes", v.Len())
	}
	// Oldest first, "can't tell" apart.
	want := store.VoteColumns{
		Item:     []int64{ids[0], ids[0], ids[1]},
		Labeller: []int64{ana.ID, ben.ID, ben.ID},
		Label:    []int64{glass, pet, glass},
		Seconds:  []float64{4, 6, 5},
		At:       []time.Time{t0, t0.Add(time.Minute), t0.Add(3 * time.Minute)},
		CantTell: store.CantTellColumns{Labeller: []int64{ana.ID}, Seconds: []float64{2}, At: []time.Time{t0.Add(2 * time.Minute)}},
	}
	got := v
	got.CountUntil = time.Time{}
	if d := cmp.Diff(want, got, cmp.Comparer(func(a, b time.Time) bool { return a.Equal(b) })); d != "" {
		t.Errorf("ProjectVotes (-want +got):\n%s", d)
	}
	// CountUntil lies one minute (countMargin) before the read.
	if lo, hi := before.Add(-time.Minute-5*time.Second), time.Now().Add(-time.Minute+5*time.Second); v.CountUntil.Before(lo) || v.CountUntil.After(hi) {
		t.Errorf("CountUntil = %v, want about a minute before %v", v.CountUntil, before)
	}
	if empty := (store.VoteColumns{}); empty.Len() != 0 {
		t.Errorf("empty Len = %d", empty.Len())
	}

	// The views join the labeller's figures and the item's consensus.
	if err := f.s.SaveLabellerStats(ctx, f.project.ID, []store.LabellerStats{
		{UserID: ana.ID, LabellerFigures: store.LabellerFigures{Accuracy: ptr(0.9), Agreement: ptr(0.7)}},
	}); err != nil {
		t.Fatal(err)
	}
	f.exec(t, `INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count)
		VALUES ($1, $2, $3, 0.6, 'mv', 2)`, ids[0], f.project.ID, pet)

	type view struct {
		Item         int64
		Login        string
		LabelKey     string
		LabelName    string
		Seconds      float64
		At           time.Time
		Accuracy     *float64
		Consensus    string
		HasLabelID   bool
		LabelIDRight bool
	}
	views := func(vs []store.VoteView) []view {
		var out []view
		for _, v := range vs {
			right := v.LabelID != nil && f.labels[v.LabelKey].ID == *v.LabelID
			out = append(out, view{v.ItemID, v.Labeller.Login, v.LabelKey, v.LabelName, v.Seconds, v.CreatedAt.UTC(),
				v.Accuracy, v.ConsensusKey, v.LabelID != nil, right})
		}
		return out
	}
	anaOn0 := view{ids[0], ana.Login, "glass", "glass", 4, t0, ptr(0.9), "pet-bottle", true, true}
	benOn0 := view{ids[0], ben.Login, "pet-bottle", "PET bottle", 6, t0.Add(time.Minute), nil, "pet-bottle", true, true}
	anaOn1 := view{ids[1], ana.Login, "", "", 2, t0.Add(2 * time.Minute), ptr(0.9), "", false, false}
	benOn1 := view{ids[1], ben.Login, "glass", "glass", 5, t0.Add(3 * time.Minute), nil, "", true, true}

	cases := []struct {
		name string
		get  func() ([]store.VoteView, error)
		want []view
	}{
		{"votes on item 0, oldest first", func() ([]store.VoteView, error) { return f.s.VotesOnItem(ctx, f.project.ID, ids[0]) }, []view{anaOn0, benOn0}},
		{"votes on item 1", func() ([]store.VoteView, error) { return f.s.VotesOnItem(ctx, f.project.ID, ids[1]) }, []view{anaOn1, benOn1}},
		{"item of another project", func() ([]store.VoteView, error) { return f.s.VotesOnItem(ctx, f.project.ID+1000000, ids[0]) }, nil},
		{"ana's recent, newest first", func() ([]store.VoteView, error) { return f.s.RecentVotes(ctx, f.project.ID, ana.ID, 10) }, []view{anaOn1, anaOn0}},
		{"ben's latest one", func() ([]store.VoteView, error) { return f.s.RecentVotes(ctx, f.project.ID, ben.ID, 1) }, []view{benOn1}},
		{"lead has none", func() ([]store.VoteView, error) { return f.s.RecentVotes(ctx, f.project.ID, f.lead.ID, 10) }, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			vs, err := c.get()
			if err != nil {
				t.Fatal(err)
			}
			if d := cmp.Diff(c.want, views(vs)); d != "" {
				t.Errorf("(-want +got):\n%s", d)
			}
		})
	}
}

func TestFitStatesAndProjectSummary(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 3)
	fitted := time.Now().UTC().Add(-time.Hour).Truncate(time.Second)
	f.vote(t, ids[0], f.labellers[0].ID, "glass", 1, fitted.Add(-time.Minute))
	f.vote(t, ids[1], f.labellers[0].ID, "", 1, fitted.Add(time.Minute))
	f.vote(t, ids[2], f.labellers[1].ID, "glass", 1, fitted.Add(2*time.Minute))
	idle, err := f.s.CreateProject(ctx, store.Project{Slug: f.project.Slug + "-idle", Name: "Idle line"})
	if err != nil {
		t.Fatal(err)
	}
	stateOf := func(id int64) store.FitState {
		t.Helper()
		all, err := f.s.FitStates(ctx)
		if err != nil {
			t.Fatal(err)
		}
		for i, s := range all {
			if i > 0 && all[i-1].ProjectID >= s.ProjectID {
				t.Errorf("FitStates not by project id at %d", i)
			}
			if s.ProjectID == id {
				return s
			}
		}
		t.Fatalf("FitStates misses project %d", id)
		return store.FitState{}
	}
	if s := stateOf(f.project.ID); s.FittedAt != nil || s.NewVotes != 3 {
		t.Errorf("before a fit: %+v; want no fit and all 3 votes new", s)
	}
	if s := stateOf(idle.ID); s.FittedAt != nil || s.NewVotes != 0 {
		t.Errorf("idle project: %+v; want no fit, 0 votes", s)
	}

	if _, _, err := f.s.ProjectSummary(ctx, f.project.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("summary before a fit: %v, want ErrNotFound", err)
	}
	sum := store.ProjectSummary{FittedAt: fitted, Method: store.MethodDS, Items: 1, Votes: 1, Labellers: 1, FitMillis: 12,
		Fleiss:       store.Estimate{Value: ptr(0.4), Low: ptr(0.2), High: ptr(0.6), Level: 0.95, Band: "moderate"},
		KappaByLabel: map[string]*float64{"glass": ptr(0.5), "pet-bottle": nil},
		Labels:       []string{"glass", "pet-bottle"}, Confusion: [][]int{{1, 0}, {0, 0}},
		ByLabel: []store.LabelWork{}}
	if err := f.s.SaveProjectSummary(ctx, f.project.ID, 1, sum); err != nil {
		t.Fatal(err)
	}
	got, votesAtFit, err := f.s.ProjectSummary(ctx, f.project.ID)
	if err != nil || votesAtFit != 1 {
		t.Fatalf("ProjectSummary = votes at fit %d, %v; want 1", votesAtFit, err)
	}
	if d := cmp.Diff(sum, got); d != "" {
		t.Errorf("ProjectSummary (-saved +read):\n%s", d)
	}
	// Votes after the fit (the "can't tell" one too) are new.
	s := stateOf(f.project.ID)
	if s.FittedAt == nil || !s.FittedAt.Equal(fitted) || s.NewVotes != 2 {
		t.Errorf("after a fit: %+v; want fitted at %v, 2 new votes", s, fitted)
	}
}

func TestTaxonomyTreeAndLabelInputs(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	parsed, err := taxonomy.ParseString("metal | Metal\n  aluminium-can | Aluminium can | light drink can\n  steel-can\npaper | Paper | flat sheets\n")
	if err != nil {
		t.Fatal(err)
	}
	in := store.LabelInputsOf(parsed)
	// Pre-order with parent indexes; an unset name reads as the key.
	want := []store.LabelInput{
		{Key: "metal", Name: "Metal", Parent: -1},
		{Key: "aluminium-can", Name: "Aluminium can", Description: "light drink can", Parent: 0},
		{Key: "steel-can", Name: "steel-can", Parent: 0},
		{Key: "paper", Name: "Paper", Description: "flat sheets", Parent: -1},
	}
	if d := cmp.Diff(want, in); d != "" {
		t.Errorf("LabelInputsOf (-want +got):\n%s", d)
	}
	if err := f.s.ReplaceTaxonomy(ctx, f.project.ID, in); err != nil {
		t.Fatal(err)
	}
	tree, labels, err := f.s.Taxonomy(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff(parsed.String(), tree.String()); d != "" {
		t.Errorf("stored tree differs from the imported one (-want +got):\n%s", d)
	}
	if len(labels) != tree.Len() {
		t.Fatalf("%d labels for %d nodes", len(labels), tree.Len())
	}
	for i, l := range labels {
		n := tree.Node(i)
		if l.Key != n.Key || l.Depth != n.Depth || (l.ParentID == nil) != (n.Parent < 0) ||
			(n.Parent >= 0 && *l.ParentID != labels[n.Parent].ID) {
			t.Errorf("label %d = %+v, node %+v", i, l, n)
		}
	}
	empty, err := f.s.CreateProject(ctx, store.Project{Slug: f.project.Slug + "-bare", Name: "Bare"})
	if err != nil {
		t.Fatal(err)
	}
	if _, _, err := f.s.Taxonomy(ctx, empty.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("Taxonomy of a project without one: %v, want ErrNotFound", err)
	}
}

func TestCreateProjectWithTaxonomy(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	labels := []store.LabelInput{{Key: "glass", Parent: -1}, {Key: "green-glass", Name: "Green glass", Parent: 0}}
	p, err := f.s.CreateProjectWithTaxonomy(ctx, store.Project{Slug: f.project.Slug + "-glass", Name: "Glass line"}, labels)
	if err != nil {
		t.Fatal(err)
	}
	if p.ID == 0 || p.Name != "Glass line" || p.Policy != store.DefaultPolicy() {
		t.Errorf("created %+v", p)
	}
	got, err := f.s.Labels(ctx, p.ID)
	if err != nil || len(got) != 2 || got[0].Key != "glass" || got[1].Key != "green-glass" || *got[1].ParentID != got[0].ID || !got[1].IsLeaf {
		t.Errorf("labels = %+v, %v", got, err)
	}
	// Without labels: a project with no taxonomy.
	bare, err := f.s.CreateProjectWithTaxonomy(ctx, store.Project{Slug: f.project.Slug + "-bare", Name: "Bare"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if got, err := f.s.Labels(ctx, bare.ID); err != nil || len(got) != 0 {
		t.Errorf("labels of a project made without = %v, %v", got, err)
	}
	// A bad key leaves no project behind.
	bad := f.project.Slug + "-bad"
	_, err = f.s.CreateProjectWithTaxonomy(ctx, store.Project{Slug: bad, Name: "Bad"}, []store.LabelInput{{Key: "Bad Key", Parent: -1}})
	if !errors.Is(err, store.ErrConflict) {
		t.Errorf("bad key: %v, want ErrConflict", err)
	}
	if _, err := f.s.ProjectBySlug(ctx, bad); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("project after a failed create: %v, want ErrNotFound", err)
	}
	// A taken slug is a conflict too.
	if _, err := f.s.CreateProjectWithTaxonomy(ctx, store.Project{Slug: p.Slug, Name: "again"}, labels); !errors.Is(err, store.ErrConflict) {
		t.Errorf("taken slug: %v, want ErrConflict", err)
	}
}

func TestGoldLabels(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 3)
	if g, err := f.s.GoldLabels(ctx, f.project.ID); err != nil || len(g) != 0 {
		t.Errorf("GoldLabels before any = %v, %v; want empty", g, err)
	}
	if _, err := f.s.AddGoldAnswers(ctx, f.project.ID, f.lead.ID, []store.GoldInput{
		{Item: "belt-0.jpg", Label: "glass"}, {Item: "belt-2.jpg", Label: "plastic-film"},
	}); err != nil {
		t.Fatal(err)
	}
	// A lead's decision is a known answer too.
	if err := f.s.SetLeadLabel(ctx, f.project.ID, ids[1], f.labels["pet-bottle"].ID, f.lead.ID); err != nil {
		t.Fatal(err)
	}
	// Another project's gold must not show.
	g2 := newFixture(t)
	other := g2.leadItems(t, 1)
	if err := g2.s.SetGoldAnswer(ctx, g2.project.ID, other[0], g2.labels["glass"].ID, store.GoldSourceGold, nil); err != nil {
		t.Fatal(err)
	}
	got, err := f.s.GoldLabels(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	want := map[int64]int64{ids[0]: f.labels["glass"].ID, ids[1]: f.labels["pet-bottle"].ID, ids[2]: f.labels["plastic-film"].ID}
	if d := cmp.Diff(want, got); d != "" {
		t.Errorf("GoldLabels (-want +got):\n%s", d)
	}
	// A new answer replaces the old.
	if _, err := f.s.AddGoldAnswers(ctx, f.project.ID, f.lead.ID, []store.GoldInput{{Item: "belt-0.jpg", Label: "pet-bottle"}}); err != nil {
		t.Fatal(err)
	}
	if got, _ := f.s.GoldLabels(ctx, f.project.ID); got[ids[0]] != f.labels["pet-bottle"].ID || len(got) != 3 {
		t.Errorf("after replacing item 0's answer: %v", got)
	}
}

func TestProjectOverviews(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 3)
	if err := f.s.SetGoldAnswer(ctx, f.project.ID, ids[0], f.labels["glass"].ID, store.GoldSourceGold, nil); err != nil {
		t.Fatal(err)
	}
	f.exec(t, `UPDATE items SET status = 'review' WHERE id = $1`, ids[1])
	bare, err := f.s.CreateProject(ctx, store.Project{Slug: f.project.Slug + "-bare", Name: "Bare"})
	if err != nil {
		t.Fatal(err)
	}
	all, err := f.s.ProjectOverviews(ctx)
	if err != nil {
		t.Fatal(err)
	}
	byID := map[int64]store.ProjectOverview{}
	for i, o := range all {
		if i > 0 && all[i-1].Slug >= o.Slug {
			t.Errorf("overviews not by slug at %d: %q then %q", i, all[i-1].Slug, o.Slug)
		}
		byID[o.ID] = o
	}
	// Leaves of the fixture's taxonomy: pet-bottle, plastic-film, glass
	// (plastic is inner). Done: the gold item only.
	if o, ok := byID[f.project.ID]; !ok || o.Items != 3 || o.Done != 1 || o.Labels != 3 || !cmp.Equal(o.Project, f.project) {
		t.Errorf("fixture project overview = %+v (found %v); want 3 items, 1 done, 3 leaves", o, ok)
	}
	if o, ok := byID[bare.ID]; !ok || o.Items != 0 || o.Done != 0 || o.Labels != 0 {
		t.Errorf("bare project overview = %+v (found %v); want zeros", o, ok)
	}
}

func TestNewAndPing(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	s := store.New(f.s.Pool())
	if err := s.Ping(ctx); err != nil {
		t.Fatalf("Ping: %v", err)
	}
	if p, err := s.ProjectByID(ctx, f.project.ID); err != nil || p.Slug != f.project.Slug {
		t.Errorf("a store made by New reads %+v, %v", p, err)
	}
	cancelled, cancel := context.WithCancel(ctx)
	cancel()
	if err := s.Ping(cancelled); err == nil {
		t.Error("Ping on a cancelled context succeeded")
	}
}

func TestGoldRowErrorText(t *testing.T) {
	cases := []struct {
		err  store.GoldRowError
		want string
	}{
		// Index is 0-based; the text counts rows from 1 as a lead's file does.
		{store.GoldRowError{Index: 0, Field: "item", Msg: "no item named belt-9.jpg"}, "row 1, item: no item named belt-9.jpg"},
		{store.GoldRowError{Index: 41, Field: "label", Msg: "plastic is not a leaf"}, "row 42, label: plastic is not a leaf"},
	}
	for _, c := range cases {
		if got := c.err.Error(); got != c.want {
			t.Errorf("Error() = %q, want %q", got, c.want)
		}
	}
}
