package store_test

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"testing"
	"time"

	"github.com/google/go-cmp/cmp"

	"github.com/concord-labs/concord/store"
)

// leadItems adds n items named belt-<i>.jpg and returns their ids in order.
func (f *fixture) leadItems(t *testing.T, n int) []int64 {
	t.Helper()
	var in []store.NewItem
	for i := range n {
		name := fmt.Sprintf("belt-%d.jpg", i)
		sum := sha256.Sum256([]byte(f.project.Slug + name))
		in = append(in, store.NewItem{SHA256: sum, FileKey: hex.EncodeToString(sum[:]), OriginalName: name,
			MediaType: "image/jpeg", Bytes: 10, Width: 4, Height: 4})
	}
	got, err := f.s.InsertItems(context.Background(), f.project.ID, in)
	if err != nil {
		t.Fatal(err)
	}
	ids := make([]int64, n)
	for i, it := range in {
		ids[i] = got[it.SHA256]
	}
	return ids
}

func (f *fixture) exec(t *testing.T, sql string, args ...any) {
	t.Helper()
	if _, err := f.s.Pool().Exec(context.Background(), sql, args...); err != nil {
		t.Fatalf("%s: %v", sql, err)
	}
}

func (f *fixture) vote(t *testing.T, item, labeller int64, label string, seconds float64, at time.Time) {
	t.Helper()
	var labelID *int64
	if label != "" {
		id := f.labels[label].ID
		labelID = &id
	}
	f.exec(t, `INSERT INTO votes (id, project_id, item_id, labeller_id, label_id, seconds, created_at)
		VALUES (gen_random_uuid(), $1, $2, $3, $4, $5, $6)`, f.project.ID, item, labeller, labelID, seconds, at)
}

func TestStatusCountsAndActivity(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 5)
	f.exec(t, `UPDATE items SET status = 'done', votes_needed = 0 WHERE id = $1`, ids[0])
	f.exec(t, `UPDATE items SET status = 'review', votes_needed = 0 WHERE id = $1`, ids[1])
	f.exec(t, `UPDATE items SET status = 'needs_votes', votes_needed = 2 WHERE id = $1`, ids[2])
	f.exec(t, `UPDATE items SET votes_needed = 3 WHERE id = ANY($1)`, ids[3:])
	c, err := f.s.ProjectStatusCounts(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	want := store.StatusCounts{ByStatus: map[string]int{"done": 1, "review": 1, "needs_votes": 1, "unstarted": 2}, Total: 5, VotesNeeded: 8}
	if d := cmp.Diff(want, c); d != "" {
		t.Error(d)
	}

	now := time.Date(2025, 3, 4, 10, 30, 0, 0, time.UTC)
	ana, ben := f.labellers[0].ID, f.labellers[1].ID
	f.vote(t, ids[0], ana, "glass", 4, now.Add(-10*time.Minute))
	f.vote(t, ids[0], ben, "glass", 6, now.Add(-5*time.Hour))
	f.vote(t, ids[1], ben, "", 2, now.Add(-50*time.Minute))
	f.vote(t, ids[2], ana, "pet-bottle", 8, now.Add(-30*time.Hour))
	hours, err := f.s.VotesPerHour(ctx, f.project.ID, now.Add(-24*time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	wantHours := []store.HourCount{
		{Hour: time.Date(2025, 3, 4, 5, 0, 0, 0, time.UTC), Votes: 1},
		{Hour: time.Date(2025, 3, 4, 9, 0, 0, 0, time.UTC), Votes: 1},
		{Hour: time.Date(2025, 3, 4, 10, 0, 0, 0, time.UTC), Votes: 1},
	}
	if d := cmp.Diff(wantHours, hours); d != "" {
		t.Error(d)
	}
	lastHour, today, err := f.s.ActiveLabellers(ctx, f.project.ID, now.Add(-time.Hour), now.Truncate(24*time.Hour))
	if err != nil || lastHour != 2 || today != 2 {
		t.Errorf("active = %d last hour, %d today, %v; want 2, 2", lastHour, today, err)
	}

	work, err := f.s.WorkByLabeller(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	if len(work) != 2 || work[0].Votes != 2 || work[0].Labelled+work[1].Labelled != 3 || work[0].Seconds+work[1].Seconds != 20 {
		t.Errorf("work = %+v; want 2 labellers, 4 votes (3 labelled), 20 s", work)
	}
}

func TestSearchItemsReviewFirstAndPages(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 7)
	f.exec(t, `UPDATE items SET status = 'review' WHERE id = ANY($1)`, []int64{ids[2], ids[5]})
	for i, conf := range map[int]float64{0: 0.99, 1: 0.5, 2: 0.6, 3: 0.97} {
		f.exec(t, `INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count, tied)
			VALUES ($1, $2, $3, $4, 'ds', 3, $5)`, ids[i], f.project.ID, f.labels["glass"].ID, conf, i == 3)
	}
	var seen []int64
	var cur store.ItemCursor
	for page := 0; ; page++ {
		rows, next, err := f.s.SearchItems(ctx, f.project.ID, 0.95, store.ItemFilter{}, cur, 3)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range rows {
			seen = append(seen, r.ID)
		}
		if next == nil {
			break
		}
		if page > 5 {
			t.Fatal("pagination does not end")
		}
		cur = *next
	}
	want := []int64{ids[2], ids[5], ids[0], ids[1], ids[3], ids[4], ids[6]}
	if d := cmp.Diff(want, seen); d != "" {
		t.Errorf("order (review first, then by id): %s", d)
	}

	rows, _, err := f.s.SearchItems(ctx, f.project.ID, 0.95, store.ItemFilter{Disputed: true}, store.ItemCursor{}, 50)
	if err != nil {
		t.Fatal(err)
	}
	var disputed []int64
	for _, r := range rows {
		disputed = append(disputed, r.ID)
	}
	// 0.6 (review) first, then 0.5 and the tied 0.97.
	if d := cmp.Diff([]int64{ids[2], ids[1], ids[3]}, disputed); d != "" {
		t.Errorf("disputed: %s", d)
	}
	lo, hi := 0.55, 0.98
	rows, _, err = f.s.SearchItems(ctx, f.project.ID, 0.95, store.ItemFilter{MinConfidence: &lo, MaxConfidence: &hi}, store.ItemCursor{}, 50)
	if err != nil || len(rows) != 2 {
		t.Errorf("confidence 0.55-0.98: %d rows, %v; want 2", len(rows), err)
	}
}

func TestLeadLabelAndGold(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 3)
	f.exec(t, `UPDATE items SET status = 'review' WHERE id = $1`, ids[0])
	if err := f.s.SetLeadLabel(ctx, f.project.ID, ids[0], f.labels["plastic"].ID, f.lead.ID); !errors.Is(err, store.ErrConflict) {
		t.Errorf("inner label as final: %v, want ErrConflict", err)
	}
	if err := f.s.SetLeadLabel(ctx, f.project.ID, ids[0], f.labels["glass"].ID, f.lead.ID); err != nil {
		t.Fatal(err)
	}
	it, _ := f.s.Item(ctx, f.project.ID, ids[0])
	c, err := f.s.ConsensusOf(ctx, f.project.ID, ids[0])
	g, gerr := f.s.GoldAnswerOf(ctx, f.project.ID, ids[0])
	if it.Status != "done" || err != nil || c.Method != "lead" || c.Confidence != 1 || gerr != nil || g.Source != "lead" || *g.DecidedBy != f.lead.ID {
		t.Errorf("after decision: status %s, consensus %+v (%v), gold %+v (%v)", it.Status, c, err, g, gerr)
	}

	sum := sha256.Sum256([]byte(f.project.Slug + "belt-2.jpg"))
	n, err := f.s.AddGoldAnswers(ctx, f.project.ID, f.lead.ID, []store.GoldInput{
		{Item: fmt.Sprint(ids[0]), Label: "pet-bottle"},
		{Item: "belt-1.jpg", Label: "glass"},
		{Item: hex.EncodeToString(sum[:5]), Label: "plastic-film"},
	})
	if err != nil || n != 3 {
		t.Fatalf("add gold: %d, %v", n, err)
	}
	for i, want := range []string{"pet-bottle", "glass", "plastic-film"} {
		g, err := f.s.GoldAnswerOf(ctx, f.project.ID, ids[i])
		if err != nil || g.LabelID != f.labels[want].ID || g.Source != "gold" {
			t.Errorf("item %d: %+v, %v; want gold %s", i, g, err, want)
		}
	}

	for _, tc := range []struct {
		in    store.GoldInput
		field string
	}{
		{store.GoldInput{Item: "belt-1.jpg", Label: "plastic"}, "label"},
		{store.GoldInput{Item: "belt-1.jpg", Label: "paper"}, "label"},
		{store.GoldInput{Item: "999999999", Label: "glass"}, "item"},
		{store.GoldInput{Item: "nothing.png", Label: "glass"}, "item"},
	} {
		_, err := f.s.AddGoldAnswers(ctx, f.project.ID, f.lead.ID, []store.GoldInput{{Item: "belt-0.jpg", Label: "glass"}, tc.in})
		var re *store.GoldRowError
		if !errors.As(err, &re) || re.Index != 1 || re.Field != tc.field {
			t.Errorf("%+v: %v, want row 2 %s error", tc.in, err, tc.field)
		}
		// One transaction: the good first row was not stored either.
		if g, _ := f.s.GoldAnswerOf(ctx, f.project.ID, ids[0]); g.LabelID == f.labels["glass"].ID {
			t.Errorf("%+v: first row stored although the import failed", tc.in)
		}
	}
}

// TestVoteCountsPlusVotesSince: with a count saved, the progress and cost
// figures are the count's figures plus the votes created since its Until;
// votes before Until are not read again. The count here deliberately
// disagrees with the votes table before Until, so a full scan would show.
func TestVoteCountsPlusVotesSince(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	ids := f.leadItems(t, 4)
	ana, ben := f.labellers[0].ID, f.labellers[1].ID
	until := time.Date(2025, 3, 4, 10, 20, 0, 0, time.UTC)
	// Before until: in the votes table, but the count below stands for them.
	f.vote(t, ids[0], ana, "glass", 4, until.Add(-2*time.Hour))
	// Further back than the count keeps hours for: counted per labeller,
	// but VotesPerHour must read it from the votes table.
	f.vote(t, ids[1], ben, "glass", 5, until.Add(-10*24*time.Hour))
	// Since until: read from the votes table.
	f.vote(t, ids[2], ana, "", 2, until.Add(5*time.Minute))
	f.vote(t, ids[3], ben, "pet-bottle", 7, until.Add(50*time.Minute))

	if err := f.s.SaveProjectSummary(ctx, f.project.ID, 2, store.ProjectSummary{FittedAt: until}); err != nil {
		t.Fatal(err)
	}
	count := store.VoteCounts{Until: until,
		Labellers: []store.LabellerCount{
			{UserID: ana, Votes: 40, CantTell: 4, Seconds: 200, LastVote: until.Add(-2 * time.Hour)},
			{UserID: ben, Votes: 10, Seconds: 55, LastVote: until.Add(-30 * time.Hour)},
			// Votes only the count knows of: a full scan would miss them.
			{UserID: f.lead.ID, Votes: 3, Seconds: 9, LastVote: until.Add(-90 * time.Minute)},
		},
		Hours: []store.HourCount{
			{Hour: time.Date(2025, 3, 4, 8, 0, 0, 0, time.UTC), Votes: 30},
			{Hour: time.Date(2025, 3, 4, 10, 0, 0, 0, time.UTC), Votes: 6},
		},
	}
	if err := f.s.SaveVoteCounts(ctx, f.project.ID, count); err != nil {
		t.Fatal(err)
	}
	if got := store.VoteHoursFrom(until); !got.Equal(time.Date(2025, 2, 25, 11, 0, 0, 0, time.UTC)) {
		t.Errorf("hours kept from %v, want 167 hours before 10:00 on 4 March", got)
	}

	work, err := f.s.WorkByLabeller(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, w := range work {
		got = append(got, fmt.Sprintf("%s %d votes, %d labelled, %g s", w.User.Login, w.Votes, w.Labelled, w.Seconds))
	}
	want := []string{
		fmt.Sprintf("%s 41 votes, 36 labelled, 202 s", f.labellers[0].Login), // 40 counted + 1 can't tell since
		fmt.Sprintf("%s 11 votes, 11 labelled, 62 s", f.labellers[1].Login),  // 10 counted + 1 since
		fmt.Sprintf("%s 3 votes, 3 labelled, 9 s", f.lead.Login),             // counted only
	}
	if d := cmp.Diff(want, got); d != "" {
		t.Errorf("work by labeller (-want +got):\n%s", d)
	}

	hours, err := f.s.VotesPerHour(ctx, f.project.ID, until.Add(-12*24*time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	wantHours := []store.HourCount{
		{Hour: time.Date(2025, 2, 22, 10, 0, 0, 0, time.UTC), Votes: 1}, // before the kept hours: from the votes
		{Hour: time.Date(2025, 3, 4, 8, 0, 0, 0, time.UTC), Votes: 30},  // counted
		{Hour: time.Date(2025, 3, 4, 10, 0, 0, 0, time.UTC), Votes: 7},  // 6 counted + 1 since
		{Hour: time.Date(2025, 3, 4, 11, 0, 0, 0, time.UTC), Votes: 1},  // since
	}
	if d := cmp.Diff(wantHours, hours); d != "" {
		t.Errorf("votes per hour since 12 days back (-want +got):\n%s", d)
	}
	hours, err = f.s.VotesPerHour(ctx, f.project.ID, time.Date(2025, 3, 4, 9, 30, 0, 0, time.UTC))
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff(wantHours[2:], hours); d != "" {
		t.Errorf("votes per hour from 9:30, whole hours from 9:00 (-want +got):\n%s", d)
	}

	now := until.Add(55 * time.Minute)
	cases := []struct {
		name           string
		recent         time.Time
		earlier        time.Time
		wantRecent, wa int
	}{
		{"last hour and today", now.Add(-time.Hour), now.Truncate(24 * time.Hour), 2, 3},
		{"last 30 minutes and last 3 hours", now.Add(-30 * time.Minute), now.Add(-3 * time.Hour), 1, 3},
		{"last 3 hours and last 2 days", now.Add(-3 * time.Hour), now.Add(-48 * time.Hour), 3, 3},
		{"last 2 hours and last 2 hours 30", now.Add(-2 * time.Hour), now.Add(-150 * time.Minute), 2, 3},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r, e, err := f.s.ActiveLabellers(ctx, f.project.ID, tc.recent, tc.earlier)
			if err != nil || r != tc.wantRecent || e != tc.wa {
				t.Errorf("active = %d, %d, %v; want %d, %d", r, e, err, tc.wantRecent, tc.wa)
			}
		})
	}

	// A later count without ben and the lead (their votes gone) must not
	// leave their old totals beside its Until.
	count.Labellers = count.Labellers[:1]
	count.Until = until.Add(time.Hour)
	if err := f.s.SaveVoteCounts(ctx, f.project.ID, count); err != nil {
		t.Fatal(err)
	}
	work, err = f.s.WorkByLabeller(ctx, f.project.ID)
	if err != nil || len(work) != 1 || work[0].User.ID != ana || work[0].Votes != 40 {
		t.Errorf("after a count without ben: %+v, %v; want ana's 40 counted votes only", work, err)
	}
	if _, today, err := f.s.ActiveLabellers(ctx, f.project.ID, now, now.Add(-48*time.Hour)); err != nil || today != 1 {
		t.Errorf("active in the last 2 days after the later count: %d, %v; want ana only, as the count says", today, err)
	}
}
