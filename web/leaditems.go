package web

import (
	"errors"
	"net/http"
	"net/url"
	"strconv"
	"strings"

	"github.com/go-chi/chi/v5"

	"github.com/concord-labs/concord/store"
)

type itemsData struct {
	P      *store.Project
	Labels []store.Label
	Query  url.Values // the filter as given, to refill the form
	Rows   []store.ItemRow
	Next   string // query string of the next page; "" on the last
	Err    string
}

const itemsPerPage = 50

// parseItemFilter reads the filter form; a bad field gets a message naming it.
func parseItemFilter(q url.Values, labels []store.Label) (store.ItemFilter, store.ItemCursor, string) {
	var f store.ItemFilter
	var c store.ItemCursor
	if st := q.Get("status"); st != "" {
		ok := false
		for _, s := range store.ItemStatusOrder {
			ok = ok || s == st
		}
		if !ok {
			return f, c, "Status: choose one of the listed statuses."
		}
		f.Status = &st
	}
	if key := q.Get("label"); key != "" {
		for _, l := range labels {
			if l.Key == key {
				id := l.ID
				f.LabelID = &id
			}
		}
		if f.LabelID == nil {
			return f, c, "Consensus label: no label has the key " + strconv.Quote(key) + "."
		}
	}
	for _, b := range []struct {
		field, name string
		dst         **float64
	}{{"min_conf", "Lowest confidence", &f.MinConfidence}, {"max_conf", "Highest confidence", &f.MaxConfidence}} {
		raw := strings.TrimSpace(q.Get(b.field))
		if raw == "" {
			continue
		}
		v, err := strconv.ParseFloat(raw, 64)
		if err != nil || v < 0 || v > 1 {
			return f, c, b.name + ": give a share between 0 and 1."
		}
		*b.dst = &v
	}
	f.Disputed = q.Get("disputed") == "on"
	f.GoldOnly = q.Get("gold") == "on"
	if after := q.Get("after"); after != "" {
		c.Rest = strings.HasPrefix(after, "r")
		c.AfterID, _ = strconv.ParseInt(strings.TrimPrefix(after, "r"), 10, 64)
	}
	return f, c, ""
}

func (s *Server) showItems(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	d := itemsData{P: p, Query: r.URL.Query()}
	var err error
	if d.Labels, err = s.store.Labels(ctx, p.ID); err != nil {
		return err
	}
	f, cur, msg := parseItemFilter(d.Query, d.Labels)
	if msg != "" {
		d.Err = msg
		return s.render(w, r, http.StatusBadRequest, leadItemsPage(userFrom(ctx), d))
	}
	rows, next, err := s.store.SearchItems(ctx, p.ID, p.Policy.ConfidenceTarget, f, cur, itemsPerPage)
	if err != nil {
		return err
	}
	d.Rows = rows
	if next != nil {
		q := url.Values{}
		for k, v := range d.Query {
			q[k] = v
		}
		a := strconv.FormatInt(next.AfterID, 10)
		if next.Rest {
			a = "r" + a
		}
		q.Set("after", a)
		d.Next = q.Encode()
	}
	return s.render(w, r, http.StatusOK, leadItemsPage(userFrom(ctx), d))
}

type itemData struct {
	P         *store.Project
	Item      store.Item
	Consensus *store.ConsensusView
	Gold      *store.KnownAnswer
	Votes     []store.VoteView
	Labels    []store.Label
	ByID      map[int64]store.Label
	Saved     bool
}

func itemParam(r *http.Request) (int64, error) {
	id, err := strconv.ParseInt(chi.URLParam(r, "item"), 10, 64)
	if err != nil {
		return 0, errNotFound
	}
	return id, nil
}

func (s *Server) showItem(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	id, err := itemParam(r)
	if err != nil {
		return err
	}
	d := itemData{P: p, ByID: map[int64]store.Label{}, Saved: r.URL.Query().Get("saved") == "1"}
	if d.Item, err = s.store.Item(ctx, p.ID, id); err != nil {
		return err
	}
	if c, err := s.store.ConsensusOf(ctx, p.ID, id); err == nil {
		d.Consensus = &c
	} else if !errors.Is(err, store.ErrNotFound) {
		return err
	}
	if g, err := s.store.GoldAnswerOf(ctx, p.ID, id); err == nil {
		d.Gold = &g
	} else if !errors.Is(err, store.ErrNotFound) {
		return err
	}
	if d.Votes, err = s.store.VotesOnItem(ctx, p.ID, id); err != nil {
		return err
	}
	if d.Labels, err = s.store.Labels(ctx, p.ID); err != nil {
		return err
	}
	for _, l := range d.Labels {
		d.ByID[l.ID] = l
	}
	return s.render(w, r, http.StatusOK, leadItemPage(userFrom(ctx), d))
}

func (d itemData) labelKey(id *int64) string {
	if id == nil {
		return "none"
	}
	return d.ByID[*id].Key
}

// posteriorChart draws the consensus posterior over labels.
func (d itemData) posteriorChart() BarChart {
	c := BarChart{ID: "posterior-chart", Title: "Posterior probability of each label", XLabel: "label",
		YLabel: "probability (share)", Max: 1, Format: func(v float64) string { return strconv.FormatFloat(v, 'f', 3, 64) }}
	for i, id := range d.Consensus.PosteriorLabels {
		c.Bars = append(c.Bars, Bar{Label: d.ByID[id].Key, Value: d.Consensus.Posterior[i]})
	}
	return c
}

// setItemLabel is the lead's final word on an item; it counts as gold.
func (s *Server) setItemLabel(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	id, err := itemParam(r)
	if err != nil {
		return err
	}
	labelID, err := strconv.ParseInt(r.PostFormValue("label"), 10, 64)
	if err != nil {
		return badRequest("Label: choose a label.")
	}
	if err := s.store.SetLeadLabel(ctx, p.ID, id, labelID, userFrom(ctx).ID); err != nil {
		if isConflict(err) {
			return badRequest("Label: choose a leaf label (the most specific kind).")
		}
		return err
	}
	http.Redirect(w, r, string(leadURL(p, "items/"+strconv.FormatInt(id, 10)))+"?saved=1", http.StatusSeeOther)
	return nil
}
