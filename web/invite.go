package web

import (
	"errors"
	"net/http"
	"regexp"
	"strings"
	"time"

	"github.com/go-chi/chi/v5"

	"github.com/concord-labs/concord/store"
)

// inviteTTL is how long an invite link works.
const inviteTTL = 7 * 24 * time.Hour

// createInvite makes an invite link to the project (leads only) and
// answers with the link: JSON for API calls, a page otherwise.
func (s *Server) createInvite(w http.ResponseWriter, r *http.Request) error {
	p := projectFrom(r.Context())
	u := userFrom(r.Context())
	token, hash := newToken()
	inv, err := s.store.CreateInvite(r.Context(), p.ID, u.ID, hash, s.now().Add(inviteTTL))
	if err != nil {
		return err
	}
	link := s.baseURL(r) + "/invite/" + token
	if wantsJSON(r) {
		return writeJSON(w, http.StatusCreated, map[string]any{"link": link, "expires_at": inv.ExpiresAt})
	}
	return s.render(w, r, http.StatusCreated, inviteCreatedPage(u, p, link, inv.ExpiresAt))
}

// baseURL is the configured public address, else the request's own.
func (s *Server) baseURL(r *http.Request) string {
	if s.cfg.BaseURL != "" {
		return strings.TrimRight(s.cfg.BaseURL, "/")
	}
	scheme := "http"
	if r.TLS != nil || s.cfg.SecureCookies {
		scheme = "https"
	}
	return scheme + "://" + r.Host
}

// loginPattern mirrors the users.login check, so a bad login is explained
// instead of failing in the database.
var loginPattern = regexp.MustCompile(`^[a-z0-9][a-z0-9._@+-]{1,63}$`)

// inviteForm is what a new labeller fills in.
type inviteForm struct {
	Login, DisplayName string
	Problems           map[string]string
}

// showInvite is the public page of an invite link.
func (s *Server) showInvite(w http.ResponseWriter, r *http.Request) error {
	p, err := s.openInvite(r)
	if err != nil {
		return err
	}
	return s.render(w, r, http.StatusOK, invitePage(userFrom(r.Context()), p, inviteForm{}))
}

func (s *Server) openInvite(r *http.Request) (store.Project, error) {
	inv, err := s.store.OpenInvite(r.Context(), tokenHash(chi.URLParam(r, "token")))
	if errors.Is(err, store.ErrNotFound) {
		return store.Project{}, &userError{http.StatusNotFound, "This invite link has expired or has been used. Ask your project lead for a new one."}
	}
	if err != nil {
		return store.Project{}, err
	}
	return s.store.ProjectByID(r.Context(), inv.ProjectID)
}

// acceptInvite creates the labeller's account, adds them to the project
// and logs them in with a fresh session.
func (s *Server) acceptInvite(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p, err := s.openInvite(r)
	if err != nil {
		return err
	}
	f := inviteForm{
		Login:       strings.ToLower(strings.TrimSpace(r.PostFormValue("login"))),
		DisplayName: strings.TrimSpace(r.PostFormValue("display_name")),
		Problems:    map[string]string{},
	}
	pw := r.PostFormValue("password")
	if !loginPattern.MatchString(f.Login) {
		f.Problems["login"] = "Use 2 to 64 lower-case letters, digits or . _ @ + -, starting with a letter or digit."
	}
	if n := len([]rune(f.DisplayName)); n < 1 || n > 100 {
		f.Problems["display_name"] = "Give a name of 1 to 100 characters."
	}
	if pw != r.PostFormValue("password2") {
		f.Problems["password"] = "The two passwords differ."
	}
	hash, err := HashPassword(pw)
	if err != nil && f.Problems["password"] == "" {
		f.Problems["password"] = "Use at least 10 characters."
	}
	if len(f.Problems) > 0 {
		return s.render(w, r, http.StatusBadRequest, invitePage(userFrom(ctx), p, f))
	}
	u, _, err := s.store.AcceptInvite(ctx, tokenHash(chi.URLParam(r, "token")), store.User{Login: f.Login, DisplayName: f.DisplayName, PasswordHash: hash})
	if errors.Is(err, store.ErrConflict) {
		f.Problems["login"] = "This login is taken; choose another."
		return s.render(w, r, http.StatusConflict, invitePage(userFrom(ctx), p, f))
	}
	if err != nil {
		return err
	}
	if c, err := r.Cookie(sessionCookie); err == nil {
		s.store.DeleteSession(ctx, tokenHash(c.Value))
	}
	token, sh := newToken()
	expires := s.now().Add(s.cfg.SessionTTL)
	if err := s.store.CreateSession(ctx, sh, u.ID, expires); err != nil {
		return err
	}
	s.setSessionCookie(w, r, token, expires)
	http.Redirect(w, r, "/p/"+p.Slug+"/label", http.StatusSeeOther)
	return nil
}
