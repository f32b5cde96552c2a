package web

import (
	"context"
	"encoding/json"
	"io"
	"net/http"
	"net/url"
	"strings"
	"testing"

	"github.com/concord-labs/concord/store"
)

func TestInviteLink(t *testing.T) {
	e := newTestEnv(t)
	p := e.project()
	lead := e.login(e.user(store.RoleLead))
	labeller := e.login(e.member(p))
	// Only leads make invites.
	if resp := labeller.postJSON("/p/"+p.Slug+"/invites", `{}`); resp.StatusCode != http.StatusForbidden {
		t.Errorf("labeller makes an invite: %d, want 403", resp.StatusCode)
	}
	resp := lead.postJSON("/p/"+p.Slug+"/invites", `{}`)
	b, _ := io.ReadAll(resp.Body)
	var out struct{ Link string }
	if resp.StatusCode != http.StatusCreated || json.Unmarshal(b, &out) != nil || !strings.HasPrefix(out.Link, e.ts.URL+"/invite/") {
		t.Fatalf("create invite: %d %s", resp.StatusCode, b)
	}
	path := strings.TrimPrefix(out.Link, e.ts.URL)

	anon := e.client()
	doc := page(t, anon.get(path), http.StatusOK)
	if doc.Find("input[name=login]").Length() != 1 {
		t.Fatal("invite page has no login field")
	}
	// Mistakes are named field by field and nothing is created.
	doc = page(t, anon.postForm(path, url.Values{"login": {"Bad Login"}, "display_name": {""}, "password": {"short"}, "password2": {"short"}}), http.StatusBadRequest)
	if n := doc.Find("[role=alert]").Length(); n != 3 {
		t.Errorf("%d problems shown, want 3 (login, name, password)", n)
	}
	resp = anon.postForm(path, url.Values{"login": {"mara.k"}, "display_name": {"Mara"}, "password": {testPassword}, "password2": {testPassword}})
	if resp.StatusCode != http.StatusSeeOther || resp.Header.Get("Location") != "/p/"+p.Slug+"/label" {
		t.Fatalf("accept invite: %d to %q", resp.StatusCode, resp.Header.Get("Location"))
	}
	// Logged in and a member of the project.
	page(t, anon.get("/p/"+p.Slug+"/label"), http.StatusOK)
	u, err := e.store.UserByLogin(context.Background(), "mara.k")
	if err != nil || u.Role != store.RoleLabeller {
		t.Fatalf("new user = %+v, %v", u, err)
	}
	// The link works once.
	if resp := e.client().get(path); resp.StatusCode != http.StatusNotFound {
		t.Errorf("used invite link: %d, want 404", resp.StatusCode)
	}
}
