package web

import (
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/blob"
	"github.com/concord-labs/concord/taxonomy"
)

// setupData is everything the setup page shows; the handlers fill the part
// a failed form needs (its posted values and errors) and leave the rest.
type setupData struct {
	P          *store.Project
	Labels     []store.Label
	Counts     store.StatusCounts
	Saved      string     // which form was just saved, from ?saved=
	Form       url.Values // posted values of a rejected form
	TaxText    string
	TaxErrors  []string
	FieldErrs  fieldErrors
	GoldErr    string
	ImportErr  string
	Report     *dataset.Report
	ImportRoot string
	Invites    []store.Invite
}

// val is the value a field shows: what was posted when the form came back
// with errors, else the stored value.
func (d setupData) val(name, stored string) string {
	if d.Form != nil {
		if _, ok := d.Form[name]; ok {
			return d.Form.Get(name)
		}
	}
	return stored
}

// importRoot is the only server folder a lead may import from: a folder
// path typed into a web form must not reach the rest of the file system.
func (s *Server) importRoot() string { return s.cfg.ImportRoot }

func (s *Server) blobs() (blob.Store, error) { return blob.NewLocal(s.cfg.DataDir) }

func (s *Server) setupPage(w http.ResponseWriter, r *http.Request, status int, d setupData) error {
	ctx := r.Context()
	d.P = projectFrom(ctx)
	var err error
	if d.Labels, err = s.store.Labels(ctx, d.P.ID); err != nil {
		return err
	}
	if d.Counts, err = s.store.ProjectStatusCounts(ctx, d.P.ID); err != nil {
		return err
	}
	if d.Invites, err = s.store.Invites(ctx, d.P.ID); err != nil {
		return err
	}
	if d.FieldErrs == nil {
		d.FieldErrs = fieldErrors{}
	}
	if d.TaxText == "" && len(d.TaxErrors) == 0 && len(d.Labels) > 0 {
		if t, _, err := s.store.Taxonomy(ctx, d.P.ID); err == nil {
			var b strings.Builder
			if err := taxonomy.Format(&b, t); err == nil {
				d.TaxText = b.String()
			}
		}
	}
	d.ImportRoot = s.importRoot()
	return s.render(w, r, status, leadSetupPage(userFrom(ctx), d))
}

func (s *Server) showSetup(w http.ResponseWriter, r *http.Request) error {
	return s.setupPage(w, r, http.StatusOK, setupData{Saved: r.URL.Query().Get("saved")})
}

func savedRedirect(w http.ResponseWriter, r *http.Request, what string) error {
	http.Redirect(w, r, string(leadURL(projectFrom(r.Context()), "setup"))+"?saved="+url.QueryEscape(what)+"#"+what, http.StatusSeeOther)
	return nil
}

// saveTaxonomy takes a pasted or uploaded taxonomy file. Nothing is stored
// unless the whole file parses; every problem is listed with its line.
func (s *Server) saveTaxonomy(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseMultipartForm(4 << 20); err != nil && !errors.Is(err, http.ErrNotMultipart) {
		return badRequest("The taxonomy upload could not be read.")
	}
	text := r.FormValue("taxonomy")
	name := "pasted text"
	if f, fh, err := r.FormFile("taxonomy_file"); err == nil {
		defer f.Close()
		b, err := io.ReadAll(io.LimitReader(f, 4<<20))
		if err != nil {
			return badRequest("The taxonomy file could not be read.")
		}
		if len(b) > 0 {
			text, name = string(b), fh.Filename
		}
	}
	p := projectFrom(r.Context())
	t, err := taxonomy.ParseString(text)
	if err != nil {
		var list taxonomy.ErrorList
		var msgs []string
		if errors.As(err, &list) {
			for _, e := range list {
				msgs = append(msgs, name+": "+e.Error())
			}
		} else {
			msgs = []string{name + ": " + err.Error()}
		}
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{TaxText: text, TaxErrors: msgs})
	}
	if err := s.store.ReplaceTaxonomy(r.Context(), p.ID, store.LabelInputsOf(t)); err != nil {
		if !isConflict(err) {
			return err
		}
		return s.setupPage(w, r, http.StatusConflict, setupData{TaxText: text, TaxErrors: []string{
			name + ": a label this file leaves out still has votes, gold answers or a consensus; keep its key."}})
	}
	return savedRedirect(w, r, "taxonomy")
}

// formNumber parses one numeric field, recording a message that names it.
func formNumber(errs fieldErrors, form url.Values, field, label string, lo, hi float64, integer bool) float64 {
	raw := strings.TrimSpace(form.Get(field))
	v, err := strconv.ParseFloat(raw, 64)
	if err != nil || (integer && v != float64(int64(v))) {
		kind := "a number"
		if integer {
			kind = "a whole number"
		}
		errs.add(field, fmt.Sprintf("%s: %q is not %s.", label, raw, kind))
		return 0
	}
	if v < lo || v > hi {
		errs.add(field, fmt.Sprintf("%s: must be between %s and %s.", label, strconv.FormatFloat(lo, 'f', -1, 64), strconv.FormatFloat(hi, 'f', -1, 64)))
	}
	return v
}

func (s *Server) savePolicy(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return badRequest("The form could not be read.")
	}
	p := *projectFrom(r.Context())
	errs := fieldErrors{}
	f := r.PostForm
	pol := store.VotePolicy{
		MinVotes:         int(formNumber(errs, f, "min_votes", "Minimum votes", 1, 50, true)),
		MaxVotes:         int(formNumber(errs, f, "max_votes", "Maximum votes", 1, 50, true)),
		ConfidenceTarget: formNumber(errs, f, "confidence_target", "Confidence target", store.MinConfidenceTarget, store.MaxConfidenceTarget, false),
		GoldRate:         formNumber(errs, f, "gold_rate", "Gold rate", 0, 0.5, false),
		ClaimSeconds:     int(formNumber(errs, f, "claim_seconds", "Claim lifetime", 10, 86400, true)),
		AccuracyFloor:    formNumber(errs, f, "accuracy_floor", "Labeller accuracy floor", 0, 1, false),
		GoldFeedback:     f.Get("gold_feedback") == "on",
	}
	if errs["min_votes"] == "" && errs["max_votes"] == "" && pol.MaxVotes < pol.MinVotes {
		errs.add("max_votes", "Maximum votes: must be at least the minimum votes.")
	}
	if len(errs) > 0 {
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{Form: f, FieldErrs: errs})
	}
	p.Policy = pol
	if _, err := s.store.UpdateProject(r.Context(), p); err != nil {
		return err
	}
	return savedRedirect(w, r, "policy")
}

func (s *Server) savePay(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return badRequest("The form could not be read.")
	}
	p := *projectFrom(r.Context())
	errs := fieldErrors{}
	f := r.PostForm
	pay := store.PayModel{Model: f.Get("pay_model"), Currency: strings.ToUpper(strings.TrimSpace(f.Get("currency")))}
	if pay.Model != store.PayPerVote && pay.Model != store.PayPerHour {
		errs.add("pay_model", "Pay model: choose per vote or per hour.")
	}
	pay.Rate = formNumber(errs, f, "pay_rate", "Rate", 0, store.MaxPayRate, false)
	if len(pay.Currency) != 3 || strings.Trim(pay.Currency, "ABCDEFGHIJKLMNOPQRSTUVWXYZ") != "" {
		errs.add("currency", "Currency: give a three-letter ISO 4217 code such as EUR.")
	}
	optional := func(field, label string) *float64 {
		if strings.TrimSpace(f.Get(field)) == "" {
			return nil
		}
		v := formNumber(errs, f, field, label, 0, 1e12, false)
		return &v
	}
	pay.BudgetCap = optional("budget_cap", "Budget cap")
	pay.MinHourlyPay = optional("min_hourly_pay", "Minimum hourly pay")
	if len(errs) > 0 {
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{Form: f, FieldErrs: errs})
	}
	p.Pay = pay
	if _, err := s.store.UpdateProject(r.Context(), p); err != nil {
		return err
	}
	return savedRedirect(w, r, "pay")
}

// saveGold imports a gold CSV in one transaction; the first bad line is
// reported with its field and nothing is stored.
func (s *Server) saveGold(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseMultipartForm(8 << 20); err != nil {
		return badRequest("Send the gold answers as a file upload.")
	}
	f, fh, err := r.FormFile("gold")
	if err != nil {
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{GoldErr: "Choose a CSV file of gold answers."})
	}
	defer f.Close()
	lines, err := parseGoldCSV(f)
	if err != nil {
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{GoldErr: fh.Filename + ": " + err.Error()})
	}
	in := make([]store.GoldInput, len(lines))
	for i, l := range lines {
		in[i] = l.In
	}
	p := projectFrom(r.Context())
	if _, err := s.store.AddGoldAnswers(r.Context(), p.ID, userFrom(r.Context()).ID, in); err != nil {
		var re *store.GoldRowError
		if !errors.As(err, &re) {
			return err
		}
		ge := &goldError{Line: lines[re.Index].Line, Field: re.Field, Msg: re.Msg}
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{GoldErr: fh.Filename + ": " + ge.Error()})
	}
	return savedRedirect(w, r, "gold")
}

func (s *Server) importer() (*dataset.Importer, error) {
	b, err := s.blobs()
	if err != nil {
		return nil, err
	}
	return &dataset.Importer{Store: s.store, Blobs: b}, nil
}

// maxUpload bounds one multipart image upload.
const maxUpload = 2 << 30

// uploadImages imports the images of a multipart upload (many files at once).
func (s *Server) uploadImages(w http.ResponseWriter, r *http.Request) error {
	r.Body = http.MaxBytesReader(w, r.Body, maxUpload)
	if err := r.ParseMultipartForm(32 << 20); err != nil {
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{ImportErr: "The upload could not be read (at most 2 GiB at once)."})
	}
	defer r.MultipartForm.RemoveAll()
	files := r.MultipartForm.File["images"]
	if len(files) == 0 {
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{ImportErr: "Choose one or more image files."})
	}
	srcs := make([]dataset.Source, len(files))
	for i, fh := range files {
		srcs[i] = dataset.MultipartSource(fh)
	}
	im, err := s.importer()
	if err != nil {
		return err
	}
	rep, err := im.ImportFiles(r.Context(), projectFrom(r.Context()).ID, srcs)
	if err != nil {
		return err
	}
	return s.setupPage(w, r, http.StatusOK, setupData{Report: &rep})
}

// importFolder imports a folder (or manifest CSV) that lies under the
// import root; any other path is refused.
func (s *Server) importFolder(w http.ResponseWriter, r *http.Request) error {
	rel := strings.TrimSpace(r.PostFormValue("folder"))
	root := s.importRoot()
	fail := func(msg string) error {
		return s.setupPage(w, r, http.StatusUnprocessableEntity, setupData{ImportErr: "Folder: " + msg})
	}
	if rel == "" || filepath.IsAbs(rel) || !filepath.IsLocal(rel) {
		return fail("give a path relative to " + root + ", without \"..\".")
	}
	realRoot, err := filepath.EvalSymlinks(root)
	if err != nil {
		return fail("the import root " + root + " does not exist on the server.")
	}
	path, err := filepath.EvalSymlinks(filepath.Join(realRoot, rel))
	if err != nil {
		return fail(fmt.Sprintf("%q does not exist under %s.", rel, root))
	}
	if inside, err := filepath.Rel(realRoot, path); err != nil || !filepath.IsLocal(inside) {
		return fail(fmt.Sprintf("%q leads outside %s.", rel, root))
	}
	if _, err := os.Stat(path); err != nil {
		return fail(fmt.Sprintf("%q cannot be read.", rel))
	}
	im, err := s.importer()
	if err != nil {
		return err
	}
	rep, err := im.ImportPath(r.Context(), projectFrom(r.Context()).ID, path)
	if err != nil {
		return fail(err.Error())
	}
	return s.setupPage(w, r, http.StatusOK, setupData{Report: &rep})
}
