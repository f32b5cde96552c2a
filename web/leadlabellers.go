package web

import (
	"errors"
	"math"
	"net/http"
	"strconv"
	"strings"

	"github.com/go-chi/chi/v5"

	"github.com/concord-labs/concord/store"
)

type labellersData struct {
	P    *store.Project
	Rows []store.LabellerRow
}

func (s *Server) showLabellers(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	rows, err := s.store.LabellerRows(ctx, p.ID)
	if err != nil {
		return err
	}
	return s.render(w, r, http.StatusOK, leadLabellersPage(userFrom(ctx), labellersData{P: p, Rows: rows}))
}

type labellerData struct {
	P         *store.Project
	Row       store.LabellerRow
	Model     *store.LabellerModel // nil before a fit
	LabelKeys map[int64]string
	Votes     []store.VoteView
}

func userParam(r *http.Request) (int64, error) {
	id, err := strconv.ParseInt(chi.URLParam(r, "user"), 10, 64)
	if err != nil {
		return 0, errNotFound
	}
	return id, nil
}

func (s *Server) showLabeller(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	id, err := userParam(r)
	if err != nil {
		return err
	}
	d := labellerData{P: p, LabelKeys: map[int64]string{}}
	if d.Row, err = s.store.LabellerRowOf(ctx, p.ID, id); err != nil {
		return err
	}
	m, err := s.store.LabellerConfusion(ctx, p.ID, id)
	switch {
	case err == nil:
		d.Model = &m
	case !errors.Is(err, store.ErrNotFound):
		return err
	}
	labels, err := s.store.Labels(ctx, p.ID)
	if err != nil {
		return err
	}
	for _, l := range labels {
		d.LabelKeys[l.ID] = l.Key
	}
	if d.Votes, err = s.store.RecentVotes(ctx, p.ID, id, 50); err != nil {
		return err
	}
	return s.render(w, r, http.StatusOK, leadLabellerPage(userFrom(ctx), d))
}

// confusionChart draws the fitted confusion matrix: the chance this
// labeller votes each label (columns) when the true label is each row.
func (d labellerData) confusionChart() Heatmap {
	m := d.Model
	k := len(m.Classes)
	h := Heatmap{ID: "labeller-confusion", Title: "Estimated chance of each vote given the true label",
		XLabel: "label voted", YLabel: "true label", Max: 1,
		Format: func(v float64) string { return strconv.FormatFloat(100*v, 'f', 0, 64) + "%" }}
	for _, c := range m.Classes {
		name := d.LabelKeys[c]
		if name == "" {
			name = "#" + strconv.FormatInt(c, 10)
		}
		h.Rows = append(h.Rows, name)
		h.Cols = append(h.Cols, name)
	}
	for t := range k {
		row := make([]float64, k)
		for j := range k {
			row[j] = math.NaN()
			if t*k+j < len(m.Matrix) {
				row[j] = m.Matrix[t*k+j]
			}
		}
		h.Cells = append(h.Cells, row)
	}
	return h
}

// setLabellerStatus pauses, resumes or blocks a labeller in this project.
func (s *Server) setLabellerStatus(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	id, err := userParam(r)
	if err != nil {
		return err
	}
	status := r.PostFormValue("status")
	if status != store.StatusActive && status != store.StatusPaused && status != store.StatusBlocked {
		return badRequest("Status must be active, paused or blocked.")
	}
	reason := strings.TrimSpace(r.PostFormValue("reason"))
	if reason == "" {
		reason = "set by " + userFrom(ctx).Login
	}
	if err := s.store.SetMemberStatus(ctx, p.ID, id, status, reason); err != nil {
		return err
	}
	http.Redirect(w, r, string(leadURL(p, "labellers")), http.StatusSeeOther)
	return nil
}

// goldInterval prints gold accuracy with its Wilson interval.
func goldInterval(r store.LabellerRow) string {
	if r.GoldTotal == 0 {
		return "no gold items yet"
	}
	s := fmtPct(float64(r.GoldCorrect)/float64(r.GoldTotal)) + " of " + fmtInt(r.GoldTotal)
	if r.GoldLow != nil && r.GoldHigh != nil {
		s += " (" + fmtPct(*r.GoldLow) + " to " + fmtPct(*r.GoldHigh) + ")"
	}
	return s
}
