package web

import (
	"bytes"
	"context"
	"io"
	"maps"
	"net/http"
	"net/http/cookiejar"
	"net/http/httptest"
	"net/url"
	"os"
	"strconv"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/PuerkitoBio/goquery"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/storetest"
)

var testDB *storetest.DB

func TestMain(m *testing.M) { os.Exit(storetest.Main(m, &testDB)) }

var seq atomic.Int64

// uniq makes a name no other test in this package uses.
func uniq(base string) string { return base + "-" + strconv.FormatInt(seq.Add(1), 10) }

// testPassword is long enough for HashPassword.
const testPassword = "correct horse battery"

// env is a running test server on the package database.
type testEnv struct {
	t     *testing.T
	store *store.Store
	srv   *Server
	ts    *httptest.Server
}

func newTestEnv(t *testing.T) *testEnv {
	t.Helper()
	s := testDB.Open(t)
	srv := New(s, nil, Config{DataDir: t.TempDir()})
	ts := httptest.NewServer(logAPI(t, srv.Handler()))
	t.Cleanup(ts.Close)
	return &testEnv{t: t, store: s, srv: srv, ts: ts}
}

// logAPI logs every /api/ exchange (request body, answer, time taken)
// through t.Logf when CONCORD_TEST_APILOG is set: the log shows, when a
// browser test fails, what the screen asked and was told.
func logAPI(t *testing.T, h http.Handler) http.Handler {
	if os.Getenv("CONCORD_TEST_APILOG") == "" {
		return h
	}
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if !strings.HasPrefix(r.URL.Path, "/api/") {
			h.ServeHTTP(w, r)
			return
		}
		body, _ := io.ReadAll(r.Body)
		r.Body = io.NopCloser(bytes.NewReader(body))
		rec := httptest.NewRecorder()
		start := time.Now()
		h.ServeHTTP(rec, r)
		t.Logf("api %s %s %s -> %d %s (%v)", start.Format("15:04:05.000"), r.URL.Path, body, rec.Code,
			strings.TrimSpace(rec.Body.String()), time.Since(start))
		maps.Copy(w.Header(), rec.Header())
		w.WriteHeader(rec.Code)
		w.Write(rec.Body.Bytes())
	})
}

// user creates a user with testPassword.
func (e *testEnv) user(role string) store.User {
	e.t.Helper()
	hash, err := HashPassword(testPassword)
	if err != nil {
		e.t.Fatal(err)
	}
	u, err := e.store.CreateUser(context.Background(), store.User{Login: uniq(role), DisplayName: role, Role: role, PasswordHash: hash})
	if err != nil {
		e.t.Fatal(err)
	}
	return u
}

// project creates a project with a small recycling taxonomy.
func (e *testEnv) project() store.Project {
	e.t.Helper()
	ctx := context.Background()
	p, err := e.store.CreateProjectWithTaxonomy(ctx, store.Project{Slug: uniq("line"), Name: "Sorting line"}, []store.LabelInput{
		{Key: "plastic", Parent: -1},
		{Key: "pet-bottle", Name: "PET bottle", Parent: 0},
		{Key: "plastic-film", Name: "Plastic film", Parent: 0},
		{Key: "glass", Parent: -1},
	})
	if err != nil {
		e.t.Fatal(err)
	}
	return p
}

// client is a browser-like client with its own cookie jar. Its requests
// carry Sec-Fetch-Site: same-origin like a real browser's would.
type client struct {
	t    *testing.T
	base string
	hc   *http.Client
}

func (e *testEnv) client() *client {
	jar, _ := cookiejar.New(nil)
	return &client{t: e.t, base: e.ts.URL, hc: &http.Client{Jar: jar, CheckRedirect: func(*http.Request, []*http.Request) error {
		return http.ErrUseLastResponse
	}}}
}

// login logs u in with testPassword and fails the test unless it works.
func (e *testEnv) login(u store.User) *client {
	c := e.client()
	resp := c.postForm("/login", url.Values{"login": {u.Login}, "password": {testPassword}})
	if resp.StatusCode != http.StatusSeeOther {
		e.t.Fatalf("login %s: status %d", u.Login, resp.StatusCode)
	}
	return c
}

func (c *client) do(req *http.Request) *http.Response {
	c.t.Helper()
	req.Header.Set("Sec-Fetch-Site", "same-origin")
	resp, err := c.hc.Do(req)
	if err != nil {
		c.t.Fatal(err)
	}
	c.t.Cleanup(func() { resp.Body.Close() })
	return resp
}

func (c *client) get(path string) *http.Response {
	c.t.Helper()
	req, _ := http.NewRequest("GET", c.base+path, nil)
	return c.do(req)
}

func (c *client) postForm(path string, v url.Values) *http.Response {
	c.t.Helper()
	req, _ := http.NewRequest("POST", c.base+path, strings.NewReader(v.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	return c.do(req)
}

func (c *client) postJSON(path, body string) *http.Response {
	c.t.Helper()
	req, _ := http.NewRequest("POST", c.base+path, strings.NewReader(body))
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("Accept", "application/json")
	return c.do(req)
}

// page parses an HTML response, failing the test unless its status is want.
func page(t *testing.T, resp *http.Response, want int) *goquery.Document {
	t.Helper()
	if resp.StatusCode != want {
		b, _ := io.ReadAll(resp.Body)
		t.Fatalf("%s %s: status %d, want %d\n%.500s", resp.Request.Method, resp.Request.URL.Path, resp.StatusCode, want, b)
	}
	doc, err := goquery.NewDocumentFromReader(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return doc
}
