package web

import (
	"errors"
	"fmt"
	"math"
	"net/http"
	"strconv"
	"strings"
	"time"

	"github.com/a-h/templ"

	"github.com/concord-labs/concord/agreement"

	"github.com/concord-labs/concord/store"
)

// leadTab names the lead pages of a project, in menu order.
type leadTab struct{ Path, Name string }

var leadTabs = []leadTab{
	{"progress", "Progress"},
	{"agreement", "Agreement"},
	{"labellers", "Labellers"},
	{"items", "Items"},
	{"cost", "Cost"},
	{"releases", "Releases"},
	{"setup", "Setup"},
}

func leadURL(p *store.Project, rest string) templ.SafeURL {
	return templ.SafeURL("/lead/p/" + p.Slug + "/" + rest)
}

// fieldErrors maps a form field name to what is wrong with it; the page
// prints each message beside its field.
type fieldErrors map[string]string

func (f fieldErrors) add(field, msg string) {
	if _, ok := f[field]; !ok {
		f[field] = msg
	}
}

func (s *Server) listProjects(w http.ResponseWriter, r *http.Request) error {
	ps, err := s.store.ProjectOverviews(r.Context())
	if err != nil {
		return err
	}
	return s.render(w, r, http.StatusOK, leadProjectsPage(userFrom(r.Context()), ps))
}

func (s *Server) newProject(w http.ResponseWriter, r *http.Request) error {
	return s.render(w, r, http.StatusOK, leadNewProjectPage(userFrom(r.Context()), store.Project{}, nil))
}

// createProject makes an empty project with the default policy and pay and
// sends the lead to its setup page.
func (s *Server) createProject(w http.ResponseWriter, r *http.Request) error {
	p := store.Project{
		Slug:        strings.TrimSpace(r.PostFormValue("slug")),
		Name:        strings.TrimSpace(r.PostFormValue("name")),
		Description: strings.TrimSpace(r.PostFormValue("description")),
	}
	errs := fieldErrors{}
	if !validSlug(p.Slug) {
		errs.add("slug", "Slug: use 1 to 63 lower-case letters, digits and hyphens, starting with a letter or digit.")
	}
	if n := len([]rune(p.Name)); n < 1 || n > 200 {
		errs.add("name", "Name: give 1 to 200 characters.")
	}
	if len(errs) == 0 {
		created, err := s.store.CreateProject(r.Context(), p)
		if err == nil {
			http.Redirect(w, r, "/lead/p/"+created.Slug+"/setup", http.StatusSeeOther)
			return nil
		}
		if !isConflict(err) {
			return err
		}
		errs.add("slug", "Slug: a project with this slug exists already.")
	}
	return s.render(w, r, http.StatusUnprocessableEntity, leadNewProjectPage(userFrom(r.Context()), p, errs))
}

func validSlug(s string) bool {
	if len(s) < 1 || len(s) > 63 {
		return false
	}
	for i, c := range s {
		ok := 'a' <= c && c <= 'z' || '0' <= c && c <= '9' || c == '-' && i > 0
		if !ok {
			return false
		}
	}
	return true
}

func (s *Server) projectHome(w http.ResponseWriter, r *http.Request) error {
	http.Redirect(w, r, string(leadURL(projectFrom(r.Context()), "progress")), http.StatusSeeOther)
	return nil
}

// Number formats shared by the lead pages and their tests: a page and a
// test that format a value the same way can compare strings exactly.

// fmtStat prints a kappa, alpha or agreement to three decimals; "not defined" for nil.
func fmtStat(v *float64) string {
	if v == nil || math.IsNaN(*v) {
		return "not defined"
	}
	return strconv.FormatFloat(*v, 'f', 3, 64)
}

func fmtStat3(v float64) string { return fmtStat(&v) }

// fmtPct prints a share as a percentage with one decimal.
func fmtPct(v float64) string {
	if math.IsNaN(v) {
		return "–"
	}
	return strconv.FormatFloat(100*v, 'f', 1, 64) + " %"
}

func fmtPctPtr(v *float64) string {
	if v == nil {
		return "not estimated yet"
	}
	return fmtPct(*v)
}

// fmtMoney prints an amount with its currency code.
func fmtMoney(v float64, currency string) string {
	return strconv.FormatFloat(v, 'f', 2, 64) + " " + currency
}

func fmtInt[T int | int64](v T) string {
	s := strconv.FormatInt(int64(v), 10)
	// Thin grouping makes 1000000 readable without a locale.
	var b strings.Builder
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteString(" ")
		}
		b.WriteRune(c)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

func fmtSeconds(v *float64) string {
	if v == nil {
		return "–"
	}
	return strconv.FormatFloat(*v, 'f', 1, 64) + " s"
}

func fmtTime(t time.Time) string { return t.UTC().Format("2006-01-02 15:04 UTC") }

func fmtDuration(d time.Duration) string {
	h := d.Hours()
	switch {
	case h < 1:
		return fmt.Sprintf("%.0f min", d.Minutes())
	case h < 48:
		return fmt.Sprintf("%.1f h", h)
	default:
		return fmt.Sprintf("%.1f days", h/24)
	}
}

func itoa(v int) string { return strconv.Itoa(v) }

func i64(v int64) string { return strconv.FormatInt(v, 10) }

// statusName is how the pages call each item status.
func statusName(s string) string {
	switch s {
	case "unstarted":
		return "not started"
	case "needs_votes":
		return "needs votes"
	case "done":
		return "done"
	case "review":
		return "in review"
	}
	return s
}

func isConflict(err error) bool { return errors.Is(err, store.ErrConflict) }

func fmtFloat(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }

func fmtOptFloat(v *float64) string {
	if v == nil {
		return ""
	}
	return fmtFloat(*v)
}

func share(n, total int) string {
	if total == 0 {
		return "–"
	}
	return fmtPct(float64(n) / float64(total))
}

func methodName(m string) string {
	switch m {
	case "ds":
		return "Dawid-Skene"
	case "mv":
		return "majority vote"
	case "lead":
		return "lead decision"
	case "gold":
		return "gold answer"
	}
	return m
}

func agreementSource() string { return agreement.LandisKochSource }

func statusVerb(st string) string {
	switch st {
	case store.StatusActive:
		return "Resume"
	case store.StatusPaused:
		return "Pause"
	}
	return "Block"
}

func voteLabel(v store.VoteView) string {
	if v.LabelID == nil {
		return "can't tell"
	}
	return v.LabelKey
}

func payName(p *store.Project) string {
	if p.Pay.Model == store.PayPerHour {
		return fmtMoney(p.Pay.Rate, p.Pay.Currency) + " per recorded hour"
	}
	return fmtMoney(p.Pay.Rate, p.Pay.Currency) + " per vote"
}

func levelName(l *int) string {
	if l == nil {
		return "leaf"
	}
	return "depth " + strconv.Itoa(*l)
}
