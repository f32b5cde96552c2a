package store_test

import (
	"context"
	"crypto/sha256"
	"errors"
	"testing"
	"time"

	"github.com/concord-labs/concord/store"
)

// TestSessionProjectAccess checks the one-round-trip read of a project
// route's caller against what SessionUser, ProjectBySlug and MemberOf say
// one by one.
func TestSessionProjectAccess(t *testing.T) {
	f := newFixture(t)
	ctx := context.Background()
	other, err := f.s.CreateProject(ctx, store.Project{Slug: f.project.Slug + "-other", Name: "Other line"})
	if err != nil {
		t.Fatal(err)
	}
	paused := f.labellers[1]
	if err := f.s.SetMemberStatus(ctx, f.project.ID, paused.ID, store.StatusPaused, "gold accuracy"); err != nil {
		t.Fatal(err)
	}
	session := func(u store.User, expires time.Time) []byte {
		h := sha256.Sum256([]byte(u.Login + expires.String()))
		if err := f.s.CreateSession(ctx, h[:], u.ID, expires); err != nil {
			t.Fatal(err)
		}
		return h[:]
	}
	live := time.Now().Add(time.Hour)
	cases := []struct {
		name       string
		hash       []byte
		slug       string
		wantUser   int64
		wantProj   int64 // 0: no project
		wantStatus string
	}{
		{"member", session(f.labellers[0], live), f.project.Slug, f.labellers[0].ID, f.project.ID, store.StatusActive},
		{"paused member", session(paused, live), f.project.Slug, paused.ID, f.project.ID, store.StatusPaused},
		{"not a member", session(f.labellers[0], live.Add(time.Minute)), other.Slug, f.labellers[0].ID, other.ID, ""},
		{"lead, not a member", session(f.lead, live), f.project.Slug, f.lead.ID, f.project.ID, ""},
		{"no such project", session(f.lead, live.Add(time.Minute)), "no-such-project", f.lead.ID, 0, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			a, err := f.s.SessionProjectAccess(ctx, c.hash, c.slug)
			if err != nil {
				t.Fatal(err)
			}
			if a.User.ID != c.wantUser {
				t.Errorf("user %d, want %d", a.User.ID, c.wantUser)
			}
			switch {
			case c.wantProj == 0 && a.Project != nil:
				t.Errorf("project %d, want none", a.Project.ID)
			case c.wantProj != 0 && (a.Project == nil || a.Project.ID != c.wantProj || a.Project.Slug != c.slug):
				t.Errorf("project %+v, want id %d slug %q", a.Project, c.wantProj, c.slug)
			}
			switch {
			case c.wantStatus == "" && a.Member != nil:
				t.Errorf("membership %+v, want none", a.Member)
			case c.wantStatus != "" && a.Member == nil:
				t.Errorf("no membership, want status %q", c.wantStatus)
			case c.wantStatus != "":
				want, err := f.s.MemberOf(ctx, c.wantProj, c.wantUser)
				if err != nil {
					t.Fatal(err)
				}
				if a.Member.Status != c.wantStatus || a.Member.StatusReason != want.StatusReason ||
					a.Member.ProjectID != want.ProjectID || !a.Member.JoinedAt.Equal(want.JoinedAt) || a.Member.User.ID != c.wantUser {
					t.Errorf("membership %+v, want %+v", *a.Member, want)
				}
			}
		})
	}
	t.Run("expired session", func(t *testing.T) {
		h := session(f.labellers[0], live.Add(2*time.Minute))
		if _, err := f.s.Pool().Exec(ctx, `UPDATE sessions SET created_at = now() - interval '2 hours',
			expires_at = now() - interval '1 hour' WHERE id_hash = $1`, h); err != nil {
			t.Fatal(err)
		}
		_, err := f.s.SessionProjectAccess(ctx, h, f.project.Slug)
		if !errors.Is(err, store.ErrNotFound) {
			t.Errorf("err %v, want ErrNotFound", err)
		}
	})
}
