package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"os"
	"strings"
	"testing"

	"github.com/concord-labs/concord/store/storetest"
)

// testDB is this package's throwaway database; commands reach it through
// DATABASE_URL in the env that runConcord builds.
var testDB *storetest.DB

func TestMain(m *testing.M) { os.Exit(storetest.Main(m, &testDB)) }

// cmdResult is what one run of the binary printed and returned.
type cmdResult struct {
	stdout, stderr string
	err            error
}

// runConcord runs the concord command line in-process against the test
// database. vars are extra environment variables (KEY=VALUE).
func runConcord(t testing.TB, stdin string, args []string, vars ...string) cmdResult {
	t.Helper()
	envVars := map[string]string{"DATABASE_URL": testDB.URL}
	for _, kv := range vars {
		k, v, _ := strings.Cut(kv, "=")
		envVars[k] = v
	}
	var out, errOut bytes.Buffer
	e := &env{stdout: &out, stderr: &errOut, stdin: strings.NewReader(stdin), getenv: func(k string) string { return envVars[k] }}
	err := run(context.Background(), e, args)
	return cmdResult{out.String(), errOut.String(), err}
}

func TestHelpAndVersion(t *testing.T) {
	r := runConcord(t, "", []string{"--help"})
	if r.err != nil {
		t.Fatal(r.err)
	}
	for _, c := range commands() {
		if !strings.Contains(r.stdout, "  "+c.name+" ") {
			t.Errorf("--help does not list %q:\n%s", c.name, r.stdout)
		}
	}
	r = runConcord(t, "", []string{"version"})
	if r.err != nil || r.stdout != "concord "+version+"\n" {
		t.Errorf("version: %q, %v", r.stdout, r.err)
	}
	r = runConcord(t, "", []string{"frobnicate"})
	var ue usageError
	if !errors.As(r.err, &ue) || !strings.Contains(r.err.Error(), `unknown command "frobnicate"`) {
		t.Errorf("unknown command: %v", r.err)
	}
	// Each command answers --help with its own usage and no error beyond flag.ErrHelp.
	for _, c := range commands() {
		r := runConcord(t, "", []string{c.name, "--help"})
		if r.err != nil && !errors.Is(r.err, flag.ErrHelp) {
			t.Errorf("%s --help: %v", c.name, r.err)
		}
		if !strings.Contains(r.stdout+r.stderr, "Usage: concord "+c.name) {
			t.Errorf("%s --help printed no usage line:\n%s%s", c.name, r.stdout, r.stderr)
		}
	}
}

func TestEnvironmentSetsFlags(t *testing.T) {
	// CONCORD_MIN_VOTES fills --min-votes; a flag on the command line wins.
	r := runConcord(t, "", []string{"project", "create", "--slug", "env-flags", "--name", "Env"}, "CONCORD_MIN_VOTES=4", "CONCORD_MAX_VOTES=9")
	if r.err != nil {
		t.Fatal(r.err)
	}
	r = runConcord(t, "", []string{"project", "create", "--slug", "env-flags-2", "--name", "Env", "--min-votes", "2"}, "CONCORD_MIN_VOTES=4")
	if r.err != nil {
		t.Fatal(r.err)
	}
	r = runConcord(t, "", []string{"project", "list"})
	// Columns are padded to the widest row, so compare the fields of each row.
	rows := map[string][]string{}
	for _, line := range strings.Split(r.stdout, "\n") {
		if f := strings.Fields(line); len(f) > 0 {
			rows[f[0]] = f
		}
	}
	if f := rows["env-flags"]; len(f) < 3 || f[2] != "4-9" {
		t.Errorf("env-flags row %q, want votes 4-9 from CONCORD_MIN_VOTES/CONCORD_MAX_VOTES", f)
	}
	if f := rows["env-flags-2"]; len(f) < 3 || f[2] != "2-7" {
		t.Errorf("env-flags-2 row %q, want votes 2-7 (the flag wins over the environment)", f)
	}
	r = runConcord(t, "", []string{"project", "list"}, "CONCORD_MIN_VOTES=many")
	var ue usageError
	if !errors.As(r.err, &ue) || !strings.Contains(r.err.Error(), "CONCORD_MIN_VOTES") {
		t.Errorf("bad env value: %v", r.err)
	}
}

// A vote policy or pay flag that breaks a rule of the projects table is
// refused before the database is touched, naming the flag.
func TestProjectCreateChecksPolicyFlags(t *testing.T) {
	cases := []struct {
		flags []string
		want  string
	}{
		{[]string{"--min-votes", "5", "--max-votes", "3"}, "--max-votes 3: must be at least --min-votes (5)"},
		{[]string{"--min-votes", "0"}, "--min-votes 0: must be between 1 and 50"},
		{[]string{"--target", "1"}, "--target 1: must be between 0.5 and 0.999"},
		// The setup page's range, so the page can save what the command made.
		{[]string{"--target", "0.4"}, "--target 0.4: must be between 0.5 and 0.999"},
		{[]string{"--gold-rate", "0.6"}, "--gold-rate 0.6: must be between 0 and 0.5"},
		{[]string{"--claim-seconds", "5"}, "--claim-seconds 5: must be between 10 and 86400"},
		{[]string{"--pay-model", "per_item"}, `--pay-model "per_item": must be per_vote or per_hour`},
		{[]string{"--pay-rate", "-1"}, "--pay-rate -1: must be between 0 and 1e+06"},
		{[]string{"--pay-rate", "2e6"}, "--pay-rate 2e+06: must be between 0 and 1e+06"},
		{[]string{"--currency", "EURO"}, `--currency "EURO"`},
	}
	for i, c := range cases {
		slug := fmt.Sprintf("bad-policy-%d", i)
		r := runConcord(t, "", append([]string{"project", "create", "--slug", slug, "--name", "Bad"}, c.flags...))
		var ue usageError
		if !errors.As(r.err, &ue) || !strings.Contains(r.err.Error(), c.want) {
			t.Errorf("%v: error %v, want a usage error with %q", c.flags, r.err, c.want)
		}
		if strings.Contains(fmt.Sprint(r.err), "projects_check") {
			t.Errorf("%v: the database's constraint error leaked: %v", c.flags, r.err)
		}
		if l := runConcord(t, "", []string{"project", "list"}); strings.Contains(l.stdout, slug) {
			t.Errorf("%v: project %s was created", c.flags, slug)
		}
	}
	// A lower-case currency is taken as its code.
	if r := runConcord(t, "", []string{"project", "create", "--slug", "lower-currency", "--name", "L", "--currency", "usd"}); r.err != nil {
		t.Fatal(r.err)
	}
	if l := runConcord(t, "", []string{"project", "list"}); !strings.Contains(l.stdout, "USD") {
		t.Errorf("lower-case currency not stored as USD:\n%s", l.stdout)
	}
}
