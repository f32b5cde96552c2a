package web

import (
	"net/http"
	"net/url"
	"strings"
	"testing"

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

func mustURL(s string) *url.URL {
	u, err := url.Parse(s)
	if err != nil {
		panic(err)
	}
	return u
}
