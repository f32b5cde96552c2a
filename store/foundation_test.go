package store_test

import (
	"context"
	"errors"
	"strconv"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/concord-labs/concord/store"
)

func TestUsers(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	s := f.s
	got, err := s.UserByLogin(ctx, f.lead.Login)
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff(f.lead, got); diff != "" {
		t.Errorf("UserByLogin (-want +got):\n%s", diff)
	}
	if got, err = s.UserByID(ctx, f.lead.ID); err != nil || got.Login != f.lead.Login {
		t.Errorf("UserByID = %v, %v", got, err)
	}
	if _, err := s.UserByLogin(ctx, "nobody-here"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("missing login: err = %v, want ErrNotFound", err)
	}
	_, err = s.CreateUser(ctx, store.User{Login: f.lead.Login, DisplayName: "again", Role: store.RoleLead})
	if !errors.Is(err, store.ErrConflict) {
		t.Errorf("duplicate login: err = %v, want ErrConflict", err)
	}
	_, err = s.CreateUser(ctx, store.User{Login: "x-" + f.lead.Login, DisplayName: "x", Role: "admin"})
	if !errors.Is(err, store.ErrConflict) {
		t.Errorf("bad role: err = %v, want ErrConflict", err)
	}
	if err := s.SetPasswordHash(ctx, f.lead.ID, "hash-1"); err != nil {
		t.Fatal(err)
	}
	if err := s.SetUserStatus(ctx, f.lead.ID, store.StatusBlocked); err != nil {
		t.Fatal(err)
	}
	got, _ = s.UserByID(ctx, f.lead.ID)
	if got.PasswordHash != "hash-1" || got.Status != store.StatusBlocked {
		t.Errorf("after updates: hash %q status %q", got.PasswordHash, got.Status)
	}
	if err := s.SetPasswordHash(ctx, -1, "x"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("SetPasswordHash on missing user: %v", err)
	}
	if err := s.SetUserStatus(ctx, -1, store.StatusActive); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("SetUserStatus on missing user: %v", err)
	}
	all, err := s.ListUsers(ctx)
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	for _, u := range all {
		seen[u.Login] = true
	}
	for _, u := range append(f.labellers, f.lead) {
		if !seen[u.Login] {
			t.Errorf("ListUsers misses %s", u.Login)
		}
	}
}

func TestProjects(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	s := f.s
	p := f.project
	if p.Policy != store.DefaultPolicy() || p.Pay.Model != store.PayPerVote || p.Pay.Currency != "EUR" {
		t.Errorf("new project defaults: %+v %+v", p.Policy, p.Pay)
	}
	byslug, err := s.ProjectBySlug(ctx, p.Slug)
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff(p, byslug); diff != "" {
		t.Errorf("ProjectBySlug (-want +got):\n%s", diff)
	}
	if _, err := s.ProjectByID(ctx, -5); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("missing project: %v", err)
	}
	if _, err := s.CreateProject(ctx, store.Project{Slug: p.Slug, Name: "dup"}); !errors.Is(err, store.ErrConflict) {
		t.Errorf("duplicate slug: %v", err)
	}
	cap := 500.0
	p.Policy.MinVotes, p.Policy.MaxVotes, p.Pay.Model, p.Pay.Rate, p.Pay.BudgetCap = 2, 5, store.PayPerHour, 12.5, &cap
	up, err := s.UpdateProject(ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	if up.Policy.MinVotes != 2 || up.Policy.MaxVotes != 5 || up.Pay.Model != store.PayPerHour || up.Pay.Rate != 12.5 || *up.Pay.BudgetCap != 500 {
		t.Errorf("after update: %+v %+v", up.Policy, up.Pay)
	}
	// The schema refuses a policy whose maximum is below its minimum.
	p.Policy.MinVotes, p.Policy.MaxVotes = 5, 2
	if _, err := s.UpdateProject(ctx, p); !errors.Is(err, store.ErrConflict) {
		t.Errorf("max < min: %v, want ErrConflict", err)
	}
	p.Policy.MinVotes, p.Policy.MaxVotes, p.Policy.ConfidenceTarget = 2, 5, 1.5
	if _, err := s.UpdateProject(ctx, p); !errors.Is(err, store.ErrConflict) {
		t.Errorf("target 1.5: %v, want ErrConflict", err)
	}
	list, err := s.ListProjects(ctx)
	if err != nil || len(list) == 0 {
		t.Fatalf("ListProjects = %d, %v", len(list), err)
	}
	mine, err := s.ProjectsOfMember(ctx, f.labellers[0].ID)
	if err != nil || len(mine) != 1 || mine[0].ID != p.ID {
		t.Errorf("ProjectsOfMember = %v, %v", mine, err)
	}
	none, err := s.ProjectsOfMember(ctx, f.lead.ID)
	if err != nil || len(none) != 0 {
		t.Errorf("lead is a member of %v, %v", none, err)
	}
}

func TestTaxonomy(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	s := f.s
	labels, err := s.Labels(ctx, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	var keys []string
	for _, l := range labels {
		keys = append(keys, l.Key)
	}
	if diff := cmp.Diff([]string{"plastic", "pet-bottle", "plastic-film", "glass"}, keys); diff != "" {
		t.Errorf("pre-order (-want +got):\n%s", diff)
	}
	pet := f.labels["pet-bottle"]
	if pet.Name != "PET bottle" || pet.Depth != 1 || !pet.IsLeaf || *pet.ParentID != f.labels["plastic"].ID || pet.Position != 0 {
		t.Errorf("pet-bottle stored as %+v", pet)
	}
	if f.labels["glass"].Name != "glass" || f.labels["plastic"].IsLeaf || f.labels["glass"].Position != 1 {
		t.Errorf("defaults: glass %+v plastic %+v", f.labels["glass"], f.labels["plastic"])
	}
	// Re-import: rename, move glass under a new root, drop plastic-film; ids of kept keys stay.
	err = s.ReplaceTaxonomy(ctx, f.project.ID, []store.LabelInput{
		{Key: "material", Parent: -1},
		{Key: "plastic", Parent: 0},
		{Key: "pet-bottle", Name: "PET bottle (clear)", Parent: 1},
		{Key: "glass", Parent: 0},
	})
	if err != nil {
		t.Fatal(err)
	}
	after, _ := s.Labels(ctx, f.project.ID)
	byKey := map[string]store.Label{}
	for _, l := range after {
		byKey[l.Key] = l
	}
	if len(after) != 4 || byKey["pet-bottle"].ID != pet.ID || byKey["pet-bottle"].Depth != 2 || byKey["pet-bottle"].Name != "PET bottle (clear)" {
		t.Errorf("after re-import: %+v", after)
	}
	if _, ok := byKey["plastic-film"]; ok {
		t.Error("plastic-film not removed")
	}
	// Bad key: nothing written.
	err = s.ReplaceTaxonomy(ctx, f.project.ID, []store.LabelInput{{Key: "ok", Parent: -1}, {Key: "Bad Key", Parent: -1}})
	if !errors.Is(err, store.ErrConflict) {
		t.Errorf("bad key: %v, want ErrConflict", err)
	}
	again, _ := s.Labels(ctx, f.project.ID)
	if diff := cmp.Diff(after, again); diff != "" {
		t.Errorf("failed import changed the taxonomy (-before +after):\n%s", diff)
	}
}

func TestMembers(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	s := f.s
	ana := f.labellers[0]
	if err := s.AddMember(ctx, f.project.ID, ana.ID); err != nil {
		t.Fatalf("adding twice: %v", err)
	}
	m, err := s.MemberOf(ctx, f.project.ID, ana.ID)
	if err != nil || m.Status != store.StatusActive || m.User.Login != ana.Login {
		t.Fatalf("MemberOf = %+v, %v", m, err)
	}
	if err := s.SetMemberStatus(ctx, f.project.ID, ana.ID, store.StatusPaused, "gold accuracy below floor"); err != nil {
		t.Fatal(err)
	}
	ms, err := s.Members(ctx, f.project.ID)
	if err != nil || len(ms) != 2 || ms[0].Status != store.StatusPaused || ms[0].StatusReason != "gold accuracy below floor" {
		t.Errorf("Members = %+v, %v", ms, err)
	}
	if _, err := s.MemberOf(ctx, f.project.ID, f.lead.ID); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("non-member: %v", err)
	}
	if err := s.SetMemberStatus(ctx, f.project.ID, f.lead.ID, store.StatusPaused, ""); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("status of non-member: %v", err)
	}
	if err := s.SetMemberStatus(ctx, f.project.ID, ana.ID, "asleep", ""); !errors.Is(err, store.ErrConflict) {
		t.Errorf("bad status: %v", err)
	}
	if err := s.AddMember(ctx, -1, ana.ID); !errors.Is(err, store.ErrConflict) {
		t.Errorf("missing project: %v", err)
	}
}

// CreateUserIn makes the user and the membership together, or neither.
func TestCreateUserIn(t *testing.T) {
	ctx := context.Background()
	f := newFixture(t)
	s := f.s
	login := "carla-" + strconv.Itoa(fixtureSeq)
	u, err := s.CreateUserIn(ctx, store.User{Login: login, DisplayName: "Carla", Role: store.RoleLabeller}, f.project.ID)
	if err != nil {
		t.Fatal(err)
	}
	if m, err := s.MemberOf(ctx, f.project.ID, u.ID); err != nil || m.User.Login != login {
		t.Errorf("MemberOf new user = %+v, %v", m, err)
	}
	// A project that does not exist fails the membership's foreign key, and
	// the user made in the same transaction is gone with it.
	orphan := "dario-" + strconv.Itoa(fixtureSeq)
	if _, err := s.CreateUserIn(ctx, store.User{Login: orphan, DisplayName: "Dario", Role: store.RoleLabeller}, f.project.ID+1_000_000); err == nil {
		t.Fatal("membership of a missing project accepted")
	}
	if _, err := s.UserByLogin(ctx, orphan); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("user left behind by a failed membership: %v", err)
	}
}

// A label cannot hang under another project's label (migration 0008).
func TestTaxonomyParentSameProject(t *testing.T) {
	ctx := context.Background()
	a, b := newFixture(t), newFixture(t)
	_, err := a.s.Pool().Exec(ctx, `
		INSERT INTO taxonomy_nodes (project_id, parent_id, key, name, position, depth)
		VALUES ($1, $2, 'stray', 'Stray', 9, 1)`, b.project.ID, a.labels["plastic"].ID)
	if err == nil || !strings.Contains(err.Error(), "taxonomy_nodes_parent_same_project") {
		t.Errorf("node under another project's parent: %v, want the foreign key to refuse it", err)
	}
	// Under its own project's label it is accepted.
	if _, err := a.s.Pool().Exec(ctx, `
		INSERT INTO taxonomy_nodes (project_id, parent_id, key, name, position, depth)
		VALUES ($1, $2, 'own', 'Own', 9, 1)`, a.project.ID, a.labels["plastic"].ID); err != nil {
		t.Errorf("node under its own project's parent: %v", err)
	}
}
