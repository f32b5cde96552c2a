package store_test

import (
	"context"
	"os"
	"strconv"
	"testing"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/storetest"
)

var testDB *storetest.DB

func TestMain(m *testing.M) { os.Exit(storetest.Main(m, &testDB)) }

// fixture holds a project with a small taxonomy, a lead and two labellers.
type fixture struct {
	s         *store.Store
	project   store.Project
	lead      store.User
	labellers []store.User
	labels    map[string]store.Label
}

var fixtureSeq int

// newFixture makes a fresh project (with unique slug and logins) so tests in
// this package do not see each other's rows.
func newFixture(t *testing.T) *fixture {
	t.Helper()
	ctx := context.Background()
	s := testDB.Open(t)
	fixtureSeq++
	n := func(base string) string { return base + "-" + strconv.Itoa(fixtureSeq) }
	p, err := s.CreateProject(ctx, store.Project{Slug: n("sorting-line"), Name: "Sorting line"})
	if err != nil {
		t.Fatal(err)
	}
	f := &fixture{s: s, project: p, labels: map[string]store.Label{}}
	f.lead, err = s.CreateUser(ctx, store.User{Login: n("lead"), DisplayName: "Lead", Role: store.RoleLead})
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range []string{"ana", "ben"} {
		u, err := s.CreateUser(ctx, store.User{Login: n(l), DisplayName: l, Role: store.RoleLabeller})
		if err != nil {
			t.Fatal(err)
		}
		if err := s.AddMember(ctx, p.ID, u.ID); err != nil {
			t.Fatal(err)
		}
		f.labellers = append(f.labellers, u)
	}
	err = s.ReplaceTaxonomy(ctx, p.ID, []store.LabelInput{
		{Key: "plastic", Parent: -1},
		{Key: "pet-bottle", Name: "PET bottle", Parent: 0},
		{Key: "plastic-film", Name: "Plastic film", Parent: 0},
		{Key: "glass", Parent: -1},
	})
	if err != nil {
		t.Fatal(err)
	}
	labels, err := s.Labels(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range labels {
		f.labels[l.Key] = l
	}
	return f
}
