package web

import (
	"errors"
	"fmt"
	"net/http"
	"strconv"
	"strings"

	"github.com/go-chi/chi/v5"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store"
)

type releasesData struct {
	P        *store.Project
	Releases []store.Release
	Form     map[string]string
	Err      string
}

func (s *Server) releasesPage(w http.ResponseWriter, r *http.Request, status int, d releasesData) error {
	ctx := r.Context()
	d.P = projectFrom(ctx)
	var err error
	if d.Releases, err = s.store.Releases(ctx, d.P.ID); err != nil {
		return err
	}
	if d.Form == nil {
		d.Form = map[string]string{"split": dataset.DefaultFractions.String(), "min_confidence": "0.95",
			"level": "leaf", "format": "jsonl,csv", "seed": strconv.FormatInt(d.P.ReleaseSeed, 10)}
	}
	return s.render(w, r, status, leadReleasesPage(userFrom(ctx), d))
}

func (s *Server) showReleases(w http.ResponseWriter, r *http.Request) error {
	return s.releasesPage(w, r, http.StatusOK, releasesData{})
}

// releaseParams reads the release form; it takes the same options as the
// release command and says which field is wrong.
func releaseParams(form map[string]string, p *store.Project) (dataset.ReleaseParams, error) {
	var rp dataset.ReleaseParams
	var err error
	rp.Name = form["name"]
	if rp.Split, err = dataset.ParseFractions(form["split"]); err != nil {
		return rp, fmt.Errorf("Split: %v", err)
	}
	if rp.Level, err = dataset.ParseLevel(form["level"]); err != nil {
		return rp, fmt.Errorf("Level: %v", err)
	}
	if rp.Formats, err = dataset.ParseFormats(form["format"]); err != nil {
		return rp, fmt.Errorf("Formats: %v", err)
	}
	if rp.MinConfidence, err = strconv.ParseFloat(form["min_confidence"], 64); err != nil {
		return rp, fmt.Errorf("Minimum confidence: %q is not a number", form["min_confidence"])
	}
	rp.Seed = p.ReleaseSeed
	if form["seed"] != "" {
		if rp.Seed, err = strconv.ParseInt(form["seed"], 10, 64); err != nil {
			return rp, fmt.Errorf("Seed: %q is not a whole number", form["seed"])
		}
	}
	if err := rp.Validate(); err != nil {
		return rp, fmt.Errorf("Release: %v", err)
	}
	return rp, nil
}

// createRelease records a release and answers with its .tar.gz, so the lead
// gets the files in the same step.
func (s *Server) createRelease(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	if err := r.ParseForm(); err != nil {
		return badRequest("The form could not be read.")
	}
	form := map[string]string{}
	for _, k := range []string{"name", "split", "level", "format", "min_confidence", "seed"} {
		form[k] = strings.TrimSpace(r.PostForm.Get(k))
	}
	rp, err := releaseParams(form, p)
	if err != nil {
		return s.releasesPage(w, r, http.StatusUnprocessableEntity, releasesData{Form: form, Err: err.Error()})
	}
	uid := userFrom(ctx).ID
	_, rec, err := (&dataset.Releaser{Store: s.store}).Create(ctx, p.ID, rp, &uid)
	if err != nil {
		if isConflict(err) {
			return s.releasesPage(w, r, http.StatusConflict, releasesData{Form: form, Err: "Name: this project has a release with that name already."})
		}
		return err
	}
	http.Redirect(w, r, string(leadURL(p, "releases"))+"?made="+rec.Name, http.StatusSeeOther)
	return nil
}

// downloadRelease streams a recorded release as .tar.gz. It is rebuilt
// from its own record (dataset.Releaser.Load), so later votes, items or
// taxonomy changes leave it as it was cut; a record whose rows no longer
// give the recorded manifest checksum has been altered, and is refused
// rather than handed out as if it were the release.
func (s *Server) downloadRelease(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	rel, rec, err := (&dataset.Releaser{Store: s.store}).Load(ctx, p.ID, chi.URLParam(r, "name"))
	if mm := (*dataset.RecordMismatchError)(nil); errors.As(err, &mm) {
		s.log.Error("recorded release altered", "project", p.ID, "err", err)
		return &userError{http.StatusInternalServerError, "This release's record does not match its checksum, so it was altered after it was cut; it cannot be downloaded. Ask an administrator to check the database."}
	}
	if err != nil {
		return err
	}
	blobs, err := s.blobs()
	if err != nil {
		return err
	}
	w.Header().Set("Content-Type", "application/gzip")
	w.Header().Set("Content-Disposition", `attachment; filename="`+rec.Name+`.tar.gz"`)
	// Headers are out once the stream starts; a later failure can only cut it short.
	if err := rel.WriteTarGz(ctx, w, blobs); err != nil {
		s.log.Error("stream release", "release", rec.Name, "err", err)
	}
	return nil
}
