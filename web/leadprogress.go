package web

import (
	"net/http"
	"time"

	"github.com/concord-labs/concord/store"
)

// progressData is the progress page: item counts, the recent pace of votes
// and what that pace means for the finish.
type progressData struct {
	P           *store.Project
	Counts      store.StatusCounts
	Hours       []store.HourCount // the last 7 days, one entry per hour, zeros filled in
	Window      time.Duration     // over which the pace is measured
	RecentVotes int               // votes in Window
	PerHour     float64           // RecentVotes / Window in hours
	ActiveHour  int
	ActiveToday int
	FinishIn    time.Duration // 0 when there is no pace or nothing left
	FinishAt    time.Time
	Now         time.Time
}

// paceWindow is how far back the pace is measured: long enough to smooth a
// lunch break, short enough to follow a change of crew.
const paceWindow = 24 * time.Hour

// finishEstimate is remaining votes / votes per hour. It is 0 (unknown)
// when nothing is left or nobody voted lately.
func finishEstimate(remaining int64, perHour float64) time.Duration {
	if remaining <= 0 || perHour <= 0 {
		return 0
	}
	return time.Duration(float64(remaining) / perHour * float64(time.Hour))
}

func (s *Server) showProgress(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	now := s.now().UTC()
	d := progressData{P: p, Now: now, Window: paceWindow}
	var err error
	if d.Counts, err = s.store.ProjectStatusCounts(ctx, p.ID); err != nil {
		return err
	}
	start := now.Truncate(time.Hour).Add(-7*24*time.Hour + time.Hour)
	hours, err := s.store.VotesPerHour(ctx, p.ID, start)
	if err != nil {
		return err
	}
	byHour := map[time.Time]int{}
	for _, h := range hours {
		byHour[h.Hour] = h.Votes
	}
	for t := start; !t.After(now); t = t.Add(time.Hour) {
		n := byHour[t]
		d.Hours = append(d.Hours, store.HourCount{Hour: t, Votes: n})
		if !t.Before(now.Add(-paceWindow)) {
			d.RecentVotes += n
		}
	}
	d.PerHour = float64(d.RecentVotes) / paceWindow.Hours()
	today := time.Date(now.Year(), now.Month(), now.Day(), 0, 0, 0, 0, time.UTC)
	if d.ActiveHour, d.ActiveToday, err = s.store.ActiveLabellers(ctx, p.ID, now.Add(-time.Hour), today); err != nil {
		return err
	}
	if d.FinishIn = finishEstimate(d.Counts.VotesNeeded, d.PerHour); d.FinishIn > 0 {
		d.FinishAt = now.Add(d.FinishIn)
	}
	return s.render(w, r, http.StatusOK, leadProgressPage(userFrom(ctx), d))
}

func (d progressData) statusChart() BarChart {
	c := BarChart{ID: "status-chart", Title: "Items by status", XLabel: "status", YLabel: "items"}
	for _, st := range store.ItemStatusOrder {
		c.Bars = append(c.Bars, Bar{Label: statusName(st), Value: float64(d.Counts.ByStatus[st]), Class: "bar-" + st})
	}
	return c
}

func (d progressData) paceChart() LineChart {
	c := LineChart{ID: "pace-chart", Title: "Votes per hour, last 7 days", XLabel: "day and hour (UTC)", YLabel: "votes per hour", TickEvery: 24}
	for _, h := range d.Hours {
		c.Points = append(c.Points, Point{Label: h.Hour.Format("Jan 2 15h"), Y: float64(h.Votes)})
	}
	return c
}
