package web

import (
	"encoding/csv"
	"errors"
	"net/http"
	"strconv"
	"time"

	"github.com/concord-labs/concord/store"
)

// costRow is one labeller's pay figures.
type costRow struct {
	Login      string
	Votes      int
	Seconds    float64
	Pay        float64
	HourlyPay  *float64 // nil when no time was recorded
	BelowFloor bool
}

// costData is the cost page. All money is in the project's currency.
type costData struct {
	P            *store.Project
	Rows         []costRow
	ByLabel      []store.LabelWork
	Votes        int
	Seconds      float64
	Spend        float64
	Done         int
	PerItem      *float64 // spend / done items
	PerVote      *float64 // cost of one more vote: rate, or mean seconds x hourly rate
	Remaining    int64    // votes still needed
	Projected    *float64 // spend + remaining x PerVote
	SavedVotes   int
	SavedMoney   *float64
	SavingsKnown bool
	OverBudget   bool
	// FittedAt is the last refit, which the savings and ByLabel are as of;
	// nil before the first.
	FittedAt *time.Time
}

// computeCost turns recorded work into money. Per vote: every vote is paid
// (a "can't tell" too); per hour: recorded seconds x the hourly rate.
func computeCost(p *store.Project, work []store.LabellerWork, counts store.StatusCounts, sum *store.ProjectSummary) costData {
	d := costData{P: p, Done: counts.ByStatus["done"], Remaining: counts.VotesNeeded}
	rate := p.Pay.Rate
	for _, w := range work {
		row := costRow{Login: w.User.Login, Votes: w.Votes, Seconds: w.Seconds}
		if p.Pay.Model == store.PayPerHour {
			row.Pay = w.Seconds / 3600 * rate
		} else {
			row.Pay = float64(w.Votes) * rate
		}
		if w.Seconds > 0 {
			h := row.Pay / (w.Seconds / 3600)
			row.HourlyPay = &h
			row.BelowFloor = p.Pay.MinHourlyPay != nil && h < *p.Pay.MinHourlyPay
		}
		d.Rows = append(d.Rows, row)
		d.Votes += w.Votes
		d.Seconds += w.Seconds
		d.Spend += row.Pay
	}
	if d.Done > 0 {
		v := d.Spend / float64(d.Done)
		d.PerItem = &v
	}
	switch {
	case p.Pay.Model == store.PayPerVote:
		d.PerVote = &rate
	case d.Votes > 0:
		v := d.Seconds / float64(d.Votes) / 3600 * rate
		d.PerVote = &v
	}
	if d.PerVote != nil {
		v := d.Spend + float64(d.Remaining)**d.PerVote
		d.Projected = &v
		d.OverBudget = p.Pay.BudgetCap != nil && v > *p.Pay.BudgetCap
	}
	if sum != nil {
		d.FittedAt, d.ByLabel = &sum.FittedAt, sum.ByLabel
	}
	if sum != nil && sum.FixedVotesPerItem > 0 {
		d.SavingsKnown = true
		d.SavedVotes = sum.FinishedItems*sum.FixedVotesPerItem - sum.FinishedVotes
		if d.PerVote != nil {
			v := float64(d.SavedVotes) * *d.PerVote
			d.SavedMoney = &v
		}
	}
	return d
}

func (s *Server) loadCost(r *http.Request) (costData, error) {
	ctx := r.Context()
	p := projectFrom(ctx)
	work, err := s.store.WorkByLabeller(ctx, p.ID)
	if err != nil {
		return costData{}, err
	}
	counts, err := s.store.ProjectStatusCounts(ctx, p.ID)
	if err != nil {
		return costData{}, err
	}
	var sum *store.ProjectSummary
	if ps, _, err := s.store.ProjectSummary(ctx, p.ID); err == nil {
		sum = &ps
	} else if !errors.Is(err, store.ErrNotFound) {
		return costData{}, err
	}
	return computeCost(p, work, counts, sum), nil
}

func (s *Server) showCost(w http.ResponseWriter, r *http.Request) error {
	d, err := s.loadCost(r)
	if err != nil {
		return err
	}
	return s.render(w, r, http.StatusOK, leadCostPage(userFrom(r.Context()), d))
}

// costCSV is the labeller table of the cost page as CSV.
func (s *Server) costCSV(w http.ResponseWriter, r *http.Request) error {
	d, err := s.loadCost(r)
	if err != nil {
		return err
	}
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	w.Header().Set("Content-Disposition", `attachment; filename="`+d.P.Slug+`-cost.csv"`)
	cw := csv.NewWriter(w)
	cur := d.P.Pay.Currency
	cw.Write([]string{"labeller", "votes", "recorded_seconds", "pay_" + cur, "effective_hourly_pay_" + cur, "below_minimum_hourly_pay"})
	for _, row := range d.Rows {
		hourly := ""
		if row.HourlyPay != nil {
			hourly = strconv.FormatFloat(*row.HourlyPay, 'f', 2, 64)
		}
		cw.Write([]string{row.Login, strconv.Itoa(row.Votes), strconv.FormatFloat(row.Seconds, 'f', 1, 64),
			strconv.FormatFloat(row.Pay, 'f', 2, 64), hourly, strconv.FormatBool(row.BelowFloor)})
	}
	cw.Flush()
	return cw.Error()
}

func (d costData) money(v float64) string { return fmtMoney(v, d.P.Pay.Currency) }

func (d costData) moneyPtr(v *float64) string {
	if v == nil {
		return "not known yet"
	}
	return d.money(*v)
}

func (d costData) labelCost(l store.LabelWork) string {
	if d.PerVote == nil {
		return "not known yet"
	}
	return d.money(float64(l.Votes) * *d.PerVote)
}

func (d costData) labelCostPerItem(l store.LabelWork) string {
	if d.PerVote == nil || l.Items == 0 {
		return "not known yet"
	}
	return d.money(float64(l.Votes) * *d.PerVote / float64(l.Items))
}
