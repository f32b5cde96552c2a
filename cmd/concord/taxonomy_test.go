package main

import (
	"context"
	"strings"
	"testing"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/web"
)

func TestTaxonomyCheck(t *testing.T) {
	r := runConcord(t, "", []string{"taxonomy", "check", "../../testdata/taxonomy/recycling.txt"}, "DATABASE_URL=postgres://nowhere.invalid/none")
	if r.err != nil {
		t.Fatalf("check recycling.txt: %v", r.err)
	}
	if !strings.Contains(r.stdout, "\n    pet-bottle  (PET bottle)\n") || !strings.Contains(r.stdout, "20 labels, 15 leaves, depth 3: ok") {
		t.Errorf("tree:\n%s", r.stdout)
	}
	cases := []struct{ file, want string }{
		{"bad-indent.txt", "line 5"},
		{"dup-key.txt", `line 7, column 3: duplicate key "glass" (first on line 4)`},
	}
	for _, c := range cases {
		r := runConcord(t, "", []string{"taxonomy", "check", "../../testdata/taxonomy/" + c.file})
		if r.err == nil || !strings.Contains(r.err.Error(), c.want) || !strings.Contains(r.err.Error(), c.file) {
			t.Errorf("%s: err = %v, want it to name the file and %q", c.file, r.err, c.want)
		}
	}
}

func TestTaxonomyImportShowExport(t *testing.T) {
	if r := runConcord(t, "", []string{"project", "create", "--slug", "tax-cli", "--name", "Tax"}); r.err != nil {
		t.Fatal(r.err)
	}
	r := runConcord(t, "", []string{"taxonomy", "import", "--project", "tax-cli", "../../testdata/taxonomy/recycling.txt"})
	if r.err != nil || !strings.Contains(r.stdout, "taxonomy of 20 labels (15 leaves) imported") {
		t.Fatalf("import: %q %v", r.stdout, r.err)
	}
	// A bad file changes nothing.
	r = runConcord(t, "", []string{"taxonomy", "import", "--project", "tax-cli", "../../testdata/taxonomy/dup-key.txt"})
	if r.err == nil || !strings.Contains(r.err.Error(), "line 7") {
		t.Fatalf("bad import: %v", r.err)
	}
	r = runConcord(t, "", []string{"taxonomy", "export", "--project", "tax-cli"})
	if r.err != nil {
		t.Fatal(r.err)
	}
	check := runConcord(t, "", []string{"taxonomy", "check", "../../testdata/taxonomy/recycling.txt"})
	show := runConcord(t, "", []string{"taxonomy", "show", "--project", "tax-cli"})
	if show.err != nil || !strings.HasPrefix(check.stdout, show.stdout) {
		t.Errorf("show differs from the checked file's tree:\n%s\nvs\n%s", show.stdout, check.stdout)
	}
	if !strings.Contains(r.stdout, "    pet-bottle | PET bottle | clear or tinted drink bottle") {
		t.Errorf("export:\n%s", r.stdout)
	}
	j := runConcord(t, "", []string{"taxonomy", "export", "--project", "tax-cli", "--json"})
	if j.err != nil || !strings.Contains(j.stdout, `"key": "pet-bottle"`) {
		t.Errorf("export --json: %v\n%.300s", j.err, j.stdout)
	}
	// A project created with a bad taxonomy file is not created at all.
	r = runConcord(t, "", []string{"project", "create", "--slug", "tax-bad", "--name", "Bad", "--taxonomy", "../../testdata/taxonomy/bad-indent.txt"})
	if r.err == nil {
		t.Fatal("project create with a bad taxonomy succeeded")
	}
	if l := runConcord(t, "", []string{"project", "list"}); strings.Contains(l.stdout, "tax-bad") {
		t.Error("a project was written although its taxonomy was bad")
	}
}

func TestUserAdd(t *testing.T) {
	if r := runConcord(t, "", []string{"project", "create", "--slug", "user-cli", "--name", "U"}); r.err != nil {
		t.Fatal(r.err)
	}
	r := runConcord(t, "a long enough password\n", []string{"user", "add", "--login", "rosa", "--role", "labeller", "--project", "user-cli", "--password-stdin"})
	if r.err != nil || !strings.Contains(r.stdout, "user rosa (labeller) added") {
		t.Fatalf("user add: %q %v", r.stdout, r.err)
	}
	// The user is a member of the project, with the password's hash stored.
	ctx := context.Background()
	st := testDB.Open(t)
	p, err := st.ProjectBySlug(ctx, "user-cli")
	if err != nil {
		t.Fatal(err)
	}
	u, err := st.UserByLogin(ctx, "rosa")
	if err != nil {
		t.Fatal(err)
	}
	if m, err := st.MemberOf(ctx, p.ID, u.ID); err != nil || m.Status != store.StatusActive {
		t.Errorf("rosa's membership of user-cli: %+v, %v", m, err)
	}
	if ok, err := web.CheckPassword(u.PasswordHash, "a long enough password"); !ok || err != nil {
		t.Errorf("stored hash does not check the password: %v, %v", ok, err)
	}
	if ok, _ := web.CheckPassword(u.PasswordHash, "another password"); ok {
		t.Error("stored hash accepts a wrong password")
	}
	r = runConcord(t, "", []string{"user", "add", "--login", "rosa"})
	if r.err == nil || !strings.Contains(r.err.Error(), "conflict") {
		t.Errorf("duplicate login: %v", r.err)
	}
	r = runConcord(t, "", []string{"user", "add", "--login", "max", "--role", "boss"})
	if r.err == nil || !strings.Contains(r.err.Error(), "lead or labeller") {
		t.Errorf("bad role: %v", r.err)
	}
}

func TestMigrateStatus(t *testing.T) {
	r := runConcord(t, "", []string{"migrate", "status"})
	if r.err != nil || !strings.HasPrefix(r.stdout, "schema version ") {
		t.Fatalf("migrate status: %q %v", r.stdout, r.err)
	}
	r = runConcord(t, "", []string{"migrate", "sideways"})
	if r.err == nil {
		t.Error("unknown migrate action accepted")
	}
}
