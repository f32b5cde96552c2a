package web

import (
	"errors"
	"math"
	"net/http"

	"github.com/concord-labs/concord/agreement"
	"github.com/concord-labs/concord/store"
)

// agreementData is the agreement page: the engine's last summary, read as is.
type agreementData struct {
	P          *store.Project
	Sum        *store.ProjectSummary // nil before the first fit
	VotesAtFit int64
	Names      map[string]string // label key -> display name
}

func (s *Server) showAgreement(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	d := agreementData{P: p, Names: map[string]string{}}
	sum, votes, err := s.store.ProjectSummary(ctx, p.ID)
	switch {
	case err == nil:
		d.Sum, d.VotesAtFit = &sum, votes
	case !errors.Is(err, store.ErrNotFound):
		return err
	}
	labels, err := s.store.Labels(ctx, p.ID)
	if err != nil {
		return err
	}
	for _, l := range labels {
		d.Names[l.Key] = l.Name
	}
	return s.render(w, r, http.StatusOK, leadAgreementPage(userFrom(ctx), d))
}

// landisKochBands is the band table printed under the figures.
func landisKochBands() []agreement.Band { return agreement.LandisKochBands() }

func (d agreementData) confusionChart() Heatmap {
	sum := d.Sum
	h := Heatmap{ID: "confusion-chart", Title: "Individual votes against consensus (share of each consensus row)",
		XLabel: "label voted", YLabel: "consensus label", Rows: sum.Labels, Cols: sum.Labels, Max: 1}
	for _, row := range sum.Confusion {
		total := 0
		for _, n := range row {
			total += n
		}
		cells := make([]float64, len(row))
		text := make([]string, len(row))
		for j, n := range row {
			cells[j] = math.NaN()
			if total > 0 {
				cells[j] = float64(n) / float64(total)
			}
			text[j] = fmtInt(n)
		}
		h.Cells = append(h.Cells, cells)
		h.Text = append(h.Text, text)
	}
	return h
}

func (d agreementData) overTimeChart() LineChart {
	c := LineChart{ID: "kappa-time-chart", Title: "Fleiss' kappa over time", XLabel: "period start (UTC)",
		YLabel: "Fleiss' kappa (no unit)", Min: -0.2, Max: 1, Format: func(v float64) string { return fmtStat3(v) }}
	c.TickEvery = max(1, len(d.Sum.OverTime)/8)
	for _, t := range d.Sum.OverTime {
		pt := Point{Label: t.Start.UTC().Format("Jan 2 15h")}
		if t.Fleiss == nil {
			pt.Missing = true
		} else {
			pt.Y = *t.Fleiss
		}
		c.Points = append(c.Points, pt)
	}
	return c
}

func (d agreementData) labelName(key string) string {
	if n, ok := d.Names[key]; ok && n != key {
		return n + " (" + key + ")"
	}
	return key
}

// interval prints an estimate's bootstrap interval, or says why there is none.
func interval(e store.Estimate) string {
	if e.Low == nil || e.High == nil {
		return "no interval"
	}
	return fmtStat(e.Low) + " to " + fmtStat(e.High) + " (" + fmtPct(e.Level) + " bootstrap interval)"
}
