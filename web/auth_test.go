package web

import (
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"net/url"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/go-chi/chi/v5"
	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"

	"github.com/concord-labs/concord/store"
)

func TestPasswordHash(t *testing.T) {
	h, err := HashPassword(testPassword)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(h, "$argon2id$v=19$") {
		t.Errorf("hash %q is not in PHC argon2id form", h)
	}
	if ok, err := CheckPassword(h, testPassword); !ok || err != nil {
		t.Errorf("right password: %v, %v", ok, err)
	}
	if ok, _ := CheckPassword(h, testPassword+"x"); ok {
		t.Error("wrong password accepted")
	}
	if _, err := HashPassword("short"); err == nil {
		t.Error("short password accepted")
	}
	h2, _ := HashPassword(testPassword)
	if h == h2 {
		t.Error("two hashes of one password are equal: salt missing")
	}
}

func TestLoginLogout(t *testing.T) {
	e := newTestEnv(t)
	u := e.user(store.RoleLabeller)
	c := e.client()
	// Anonymous: sent to the login page.
	if resp := c.get("/"); resp.StatusCode != http.StatusSeeOther || !strings.HasPrefix(resp.Header.Get("Location"), "/login") {
		t.Fatalf("anonymous /: %d %s", resp.StatusCode, resp.Header.Get("Location"))
	}
	resp := c.postForm("/login", url.Values{"login": {u.Login}, "password": {"wrong password!"}})
	doc := page(t, resp, http.StatusUnauthorized)
	if got := doc.Find("[role=alert]").Text(); got != "Wrong login or password." {
		t.Errorf("alert = %q", got)
	}
	resp = c.postForm("/login", url.Values{"login": {u.Login}, "password": {testPassword}, "next": {"//evil.example/"}})
	if resp.StatusCode != http.StatusSeeOther || resp.Header.Get("Location") != "/" {
		t.Fatalf("login: %d to %q, want 303 to / (an off-site next is dropped)", resp.StatusCode, resp.Header.Get("Location"))
	}
	var cookie *http.Cookie
	for _, ck := range resp.Cookies() {
		if ck.Name == sessionCookie {
			cookie = ck
		}
	}
	if cookie == nil || !cookie.HttpOnly || cookie.SameSite != http.SameSiteLaxMode || cookie.Secure {
		t.Fatalf("session cookie = %+v, want HttpOnly, SameSite=Lax, not Secure over plain HTTP", cookie)
	}
	page(t, c.get("/"), http.StatusOK)

	// Logging in again renews the session id: the old cookie stops working.
	resp = c.postForm("/login", url.Values{"login": {u.Login}, "password": {testPassword}})
	var renewed string
	for _, ck := range resp.Cookies() {
		if ck.Name == sessionCookie {
			renewed = ck.Value
		}
	}
	if renewed == "" || renewed == cookie.Value {
		t.Fatalf("session id not renewed at login")
	}
	old := e.client()
	old.hc.Jar.SetCookies(mustURL(e.ts.URL), []*http.Cookie{{Name: sessionCookie, Value: cookie.Value}})
	if resp := old.get("/"); resp.StatusCode != http.StatusSeeOther {
		t.Errorf("old session still valid after re-login: %d", resp.StatusCode)
	}

	if resp := c.postForm("/logout", nil); resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("logout: %d", resp.StatusCode)
	}
	stolen := e.client()
	stolen.hc.Jar.SetCookies(mustURL(e.ts.URL), []*http.Cookie{{Name: sessionCookie, Value: renewed}})
	if resp := stolen.get("/"); resp.StatusCode != http.StatusSeeOther {
		t.Errorf("session still valid after logout: %d", resp.StatusCode)
	}
}

func TestLoginRateLimit(t *testing.T) {
	e := newTestEnv(t)
	u := e.user(store.RoleLabeller)
	c := e.client()
	for i := 0; i < maxFailuresLogin; i++ {
		if resp := c.postForm("/login", url.Values{"login": {u.Login}, "password": {"not it at all"}}); resp.StatusCode != http.StatusUnauthorized {
			t.Fatalf("attempt %d: %d", i, resp.StatusCode)
		}
	}
	// Even the right password is refused until the window passes.
	resp := c.postForm("/login", url.Values{"login": {u.Login}, "password": {testPassword}})
	if resp.StatusCode != http.StatusTooManyRequests || resp.Header.Get("Retry-After") == "" {
		t.Fatalf("after %d failures: %d (Retry-After %q), want 429", maxFailuresLogin, resp.StatusCode, resp.Header.Get("Retry-After"))
	}
}

func TestCrossOriginPostRefused(t *testing.T) {
	e := newTestEnv(t)
	u := e.user(store.RoleLabeller)
	c := e.client()
	req, _ := http.NewRequest("POST", e.ts.URL+"/login", strings.NewReader(url.Values{"login": {u.Login}, "password": {testPassword}}.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("Origin", "https://evil.example")
	resp, err := c.hc.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusForbidden {
		t.Errorf("cross-origin POST: %d, want 403", resp.StatusCode)
	}
}

func TestHealth(t *testing.T) {
	e := newTestEnv(t)
	c := e.client()
	for _, p := range []string{"/healthz", "/readyz"} {
		if resp := c.get(p); resp.StatusCode != http.StatusOK {
			t.Errorf("%s: %d", p, resp.StatusCode)
		}
	}
}

// /readyz says 503 once the database stops answering, while /healthz,
// which asks only whether the process serves, stays 200.
func TestReadyzWithoutDatabase(t *testing.T) {
	st, err := store.Open(context.Background(), testDB.URL)
	if err != nil {
		t.Fatal(err)
	}
	h := New(st, slog.New(slog.NewTextHandler(io.Discard, nil)), Config{DataDir: t.TempDir()}).Handler()
	get := func(path string) (int, string) {
		w := httptest.NewRecorder()
		h.ServeHTTP(w, httptest.NewRequest("GET", "http://concord.test"+path, nil))
		return w.Code, w.Body.String()
	}
	if code, body := get("/readyz"); code != http.StatusOK || body != "ready\n" {
		t.Fatalf("readyz with the database up: %d %q", code, body)
	}
	st.Close()
	if code, body := get("/readyz"); code != http.StatusServiceUnavailable || body != "database unavailable\n" {
		t.Errorf("readyz with the pool closed: %d %q, want 503", code, body)
	}
	if code, _ := get("/healthz"); code != http.StatusOK {
		t.Errorf("healthz with the pool closed: %d, want 200", code)
	}
}

func mustURL(s string) *url.URL {
	u, err := url.Parse(s)
	if err != nil {
		panic(err)
	}
	return u
}

// roundTrips counts the statements and batches sent to the database; a
// batch is one round trip however many statements it holds.
type roundTrips struct{ n atomic.Int64 }

func (c *roundTrips) TraceQueryStart(ctx context.Context, _ *pgx.Conn, _ pgx.TraceQueryStartData) context.Context {
	c.n.Add(1)
	return ctx
}
func (c *roundTrips) TraceQueryEnd(context.Context, *pgx.Conn, pgx.TraceQueryEndData) {}
func (c *roundTrips) TraceBatchStart(ctx context.Context, _ *pgx.Conn, _ pgx.TraceBatchStartData) context.Context {
	c.n.Add(1)
	return ctx
}
func (c *roundTrips) TraceBatchQuery(context.Context, *pgx.Conn, pgx.TraceBatchQueryData) {}
func (c *roundTrips) TraceBatchEnd(context.Context, *pgx.Conn, pgx.TraceBatchEndData)     {}

// TestProjectAuthOneRoundTrip checks that a labeller's API call learns its
// session, project and membership in one round trip to the database, and
// that the answers stay those of the separate reads: 404 for a project the
// labeller is not a member of or that does not exist, a lead let in
// everywhere.
func TestProjectAuthOneRoundTrip(t *testing.T) {
	ctx := context.Background()
	cfg, err := pgxpool.ParseConfig(testDB.URL)
	if err != nil {
		t.Fatal(err)
	}
	trips := &roundTrips{}
	cfg.ConnConfig.Tracer = trips
	pool, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(pool.Close)
	e := newTestEnv(t)
	srv := New(store.New(pool), nil, Config{DataDir: t.TempDir()})
	mine, theirs := e.project(), e.project()
	labeller, lead := e.member(mine), e.user(store.RoleLead)
	// The same nesting as routes.go: the session is read in a group, the
	// project in a sub-router.
	var tripsAtHandler int64
	r := chi.NewRouter()
	r.Group(func(r chi.Router) {
		r.Use(srv.loadUser, srv.requireLogin)
		r.Route("/api/p/{project}", func(r chi.Router) {
			r.Use(srv.requireProject)
			r.Post("/probe", func(w http.ResponseWriter, r *http.Request) {
				tripsAtHandler = trips.n.Load()
				writeJSON(w, http.StatusOK, map[string]any{"project": projectFrom(r.Context()).Slug,
					"member": memberFrom(r.Context()) != nil})
			})
		})
	})
	cookie := func(u store.User) string {
		token, hash := newToken()
		if err := e.store.CreateSession(ctx, hash, u.ID, time.Now().Add(time.Hour)); err != nil {
			t.Fatal(err)
		}
		return sessionCookie + "=" + token
	}
	cases := []struct {
		name       string
		user       store.User
		slug       string
		wantStatus int
		wantMember bool
		wantTrips  int64
	}{
		{"member", labeller, mine.Slug, http.StatusOK, true, 1},
		{"not a member", labeller, theirs.Slug, http.StatusNotFound, false, 1},
		// A missing project takes a second look to tell it from a dead session.
		{"no such project", labeller, "no-such-project", http.StatusNotFound, false, 2},
		{"lead", lead, theirs.Slug, http.StatusOK, false, 1},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			req := httptest.NewRequest("POST", "/api/p/"+c.slug+"/probe", nil)
			req.Header.Set("Accept", "application/json")
			req.Header.Set("Cookie", cookie(c.user))
			w := httptest.NewRecorder()
			tripsAtHandler = -1
			before := trips.n.Load()
			r.ServeHTTP(w, req)
			if w.Code != c.wantStatus {
				t.Fatalf("status %d, want %d: %s", w.Code, c.wantStatus, w.Body)
			}
			if got := trips.n.Load() - before; got != c.wantTrips {
				t.Errorf("%d round trips, want %d", got, c.wantTrips)
			}
			if c.wantStatus != http.StatusOK {
				return
			}
			if tripsAtHandler-before != 1 {
				t.Errorf("%d round trips before the handler, want 1", tripsAtHandler-before)
			}
			var got struct {
				Project string
				Member  bool
			}
			if err := json.Unmarshal(w.Body.Bytes(), &got); err != nil {
				t.Fatal(err)
			}
			if got.Project != c.slug || got.Member != c.wantMember {
				t.Errorf("handler saw project %q member %v, want %q %v", got.Project, got.Member, c.slug, c.wantMember)
			}
		})
	}
}
