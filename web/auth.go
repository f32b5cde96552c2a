package web

import (
	"context"
	"crypto/rand"
	"crypto/sha256"
	"encoding/base64"
	"errors"
	"fmt"
	"net"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"github.com/go-chi/chi/v5"

	"github.com/concord-labs/concord/store"
)

const sessionCookie = "concord_session"

// Login limits: failures counted over loginWindow, per account and per address.
const (
	loginWindow        = 15 * time.Minute
	maxFailuresLogin   = 5
	maxFailuresAddress = 20
)

type ctxKey int

const (
	userKey ctxKey = iota
	projectKey
	accessKey
	memberKey
)

// userFrom returns the logged-in user, or nil.
func userFrom(ctx context.Context) *store.User {
	u, _ := ctx.Value(userKey).(*store.User)
	return u
}

// projectFrom returns the project loaded by requireProject.
func projectFrom(ctx context.Context) *store.Project {
	p, _ := ctx.Value(projectKey).(*store.Project)
	return p
}

func newToken() (token string, hash []byte) {
	b := make([]byte, 32)
	rand.Read(b)
	token = base64.RawURLEncoding.EncodeToString(b)
	h := sha256.Sum256([]byte(token))
	return token, h[:]
}

func tokenHash(token string) []byte {
	h := sha256.Sum256([]byte(token))
	return h[:]
}

// memberFrom returns the user's membership of the project loaded by
// requireProject; nil for leads and non-members.
func memberFrom(ctx context.Context) *store.Member {
	m, _ := ctx.Value(memberKey).(*store.Member)
	return m
}

// loadUser puts the session's user, if any, into the request context. On
// a route whose path names a project, the project and the membership come
// with the user in one round trip, for requireProject to check.
func (s *Server) loadUser(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		c, err := r.Cookie(sessionCookie)
		if err == nil && c.Value != "" {
			ctx := r.Context()
			var u store.User
			if slug := chi.URLParam(r, "project"); slug != "" {
				var a store.ProjectAccess
				a, err = s.store.SessionProjectAccess(ctx, tokenHash(c.Value), slug)
				u = a.User
				ctx = context.WithValue(ctx, accessKey, &preloaded{slug: slug, access: a})
			} else {
				u, err = s.store.SessionUser(ctx, tokenHash(c.Value))
			}
			if err == nil {
				r = r.WithContext(context.WithValue(ctx, userKey, &u))
			} else if !errors.Is(err, store.ErrNotFound) {
				s.log.Error("load session", "err", err)
			}
		}
		next.ServeHTTP(w, r)
	})
}

// preloaded is the project access loadUser read with the session.
type preloaded struct {
	slug   string
	access store.ProjectAccess
}

// requireLogin sends anonymous page requests to the login page and answers
// anonymous API calls with 401.
func (s *Server) requireLogin(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if userFrom(r.Context()) == nil {
			if wantsJSON(r) {
				writeJSON(w, http.StatusUnauthorized, map[string]string{"error": "log in first"})
				return
			}
			http.Redirect(w, r, "/login?next="+url.QueryEscape(r.URL.RequestURI()), http.StatusSeeOther)
			return
		}
		next.ServeHTTP(w, r)
	})
}

// requireLead refuses everyone but leads with 403.
func (s *Server) requireLead(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if u := userFrom(r.Context()); u == nil || u.Role != store.RoleLead {
			s.writeError(w, r, http.StatusForbidden, "This page is for project leads.")
			return
		}
		next.ServeHTTP(w, r)
	})
}

// requireProject loads the {project} URL parameter (a slug). Leads see every
// project; a labeller sees only projects they are a member of, and any other
// project answers 404 so its existence does not leak.
func (s *Server) requireProject(next http.Handler) http.Handler {
	return s.handle(func(w http.ResponseWriter, r *http.Request) error {
		ctx := r.Context()
		u := userFrom(ctx)
		slug := chi.URLParam(r, "project")
		a, ok := ctx.Value(accessKey).(*preloaded)
		if !ok || a.slug != slug {
			var err error
			if a, err = s.loadAccess(ctx, u, slug); err != nil {
				return err
			}
		}
		p, m := a.access.Project, a.access.Member
		if p == nil || (u.Role != store.RoleLead && m == nil) {
			return fmt.Errorf("project %q for user %d: %w", slug, u.ID, store.ErrNotFound)
		}
		ctx = context.WithValue(ctx, projectKey, p)
		if m != nil {
			ctx = context.WithValue(ctx, memberKey, m)
		}
		next.ServeHTTP(w, r.WithContext(ctx))
		return nil
	})
}

// loadAccess reads a project and the user's membership of it when
// loadUser could not (the route's {project} lies under a sub-router).
func (s *Server) loadAccess(ctx context.Context, u *store.User, slug string) (*preloaded, error) {
	a := &preloaded{slug: slug, access: store.ProjectAccess{User: *u}}
	p, err := s.store.ProjectBySlug(ctx, slug)
	if errors.Is(err, store.ErrNotFound) {
		return a, nil
	}
	if err != nil {
		return nil, err
	}
	a.access.Project = &p
	if u.Role == store.RoleLead {
		return a, nil
	}
	m, err := s.store.MemberOf(ctx, p.ID, u.ID)
	if errors.Is(err, store.ErrNotFound) {
		return a, nil
	}
	if err != nil {
		return nil, err
	}
	a.access.Member = &m
	return a, nil
}

func (s *Server) setSessionCookie(w http.ResponseWriter, r *http.Request, token string, expires time.Time) {
	http.SetCookie(w, &http.Cookie{
		Name:     sessionCookie,
		Value:    token,
		Path:     "/",
		Expires:  expires,
		HttpOnly: true,
		Secure:   s.cfg.SecureCookies || r.TLS != nil,
		SameSite: http.SameSiteLaxMode,
	})
}

// clientAddress is the peer address without its port. A proxy's
// X-Forwarded-For is not trusted: anyone can set it to dodge the limit.
func clientAddress(r *http.Request) string {
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		return r.RemoteAddr
	}
	return host
}

func (s *Server) showLogin(w http.ResponseWriter, r *http.Request) error {
	if u := userFrom(r.Context()); u != nil {
		http.Redirect(w, r, "/", http.StatusSeeOther)
		return nil
	}
	return s.render(w, r, http.StatusOK, loginPage(safeNext(r.URL.Query().Get("next")), "", ""))
}

// login checks the password, renews the session id (a new token on every
// login, the old session deleted) and rate-limits failures.
func (s *Server) login(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	login := strings.ToLower(strings.TrimSpace(r.PostFormValue("login")))
	pw := r.PostFormValue("password")
	next := safeNext(r.PostFormValue("next"))
	addr := clientAddress(r)
	byLogin, byAddr, err := s.store.LoginFailures(ctx, login, addr, s.now().Add(-loginWindow))
	if err != nil {
		return err
	}
	if byLogin >= maxFailuresLogin || byAddr >= maxFailuresAddress {
		w.Header().Set("Retry-After", strconv.Itoa(int(loginWindow.Seconds())))
		return s.render(w, r, http.StatusTooManyRequests, loginPage(next, login,
			"Too many failed attempts. Wait 15 minutes and try again."))
	}
	u, err := s.store.UserByLogin(ctx, login)
	ok := false
	if err == nil && u.PasswordHash != "" && u.Status == store.StatusActive {
		ok, _ = CheckPassword(u.PasswordHash, pw)
	} else if err != nil && !errors.Is(err, store.ErrNotFound) {
		return err
	} else {
		// Spend the same time as a real check, so timing does not tell which logins exist.
		CheckPassword(dummyHash, pw)
	}
	if !ok {
		if err := s.store.RecordLoginFailure(ctx, login, addr); err != nil {
			return err
		}
		return s.render(w, r, http.StatusUnauthorized, loginPage(next, login, "Wrong login or password."))
	}
	if c, err := r.Cookie(sessionCookie); err == nil {
		s.store.DeleteSession(ctx, tokenHash(c.Value))
	}
	token, hash := newToken()
	expires := s.now().Add(s.cfg.SessionTTL)
	if err := s.store.CreateSession(ctx, hash, u.ID, expires); err != nil {
		return err
	}
	if err := s.store.ClearLoginFailures(ctx, login); err != nil {
		return err
	}
	s.setSessionCookie(w, r, token, expires)
	if wantsJSON(r) {
		return writeJSON(w, http.StatusOK, map[string]any{"user": u.Login, "role": u.Role})
	}
	http.Redirect(w, r, next, http.StatusSeeOther)
	return nil
}

func (s *Server) logout(w http.ResponseWriter, r *http.Request) error {
	if c, err := r.Cookie(sessionCookie); err == nil {
		if err := s.store.DeleteSession(r.Context(), tokenHash(c.Value)); err != nil {
			return err
		}
	}
	s.setSessionCookie(w, r, "", time.Unix(1, 0))
	http.Redirect(w, r, "/login", http.StatusSeeOther)
	return nil
}

// safeNext keeps redirects on this site: only absolute paths, never "//host".
func safeNext(next string) string {
	if next == "" || !strings.HasPrefix(next, "/") || strings.HasPrefix(next, "//") || strings.HasPrefix(next, "/\\") {
		return "/"
	}
	return next
}

// dummyHash is checked when the login does not exist (password "not-a-real-password").
var dummyHash = func() string {
	h, _ := HashPassword("not-a-real-password")
	return h
}()
