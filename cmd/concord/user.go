package main

import (
	"bufio"
	"context"
	"fmt"
	"strings"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/web"
)

const userUsage = `user add --login LOGIN --role lead|labeller [--name NAME] [--project SLUG] [--password-stdin]`

func runUser(ctx context.Context, e *env, args []string) error {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" {
		fmt.Fprintln(e.stderr, "Usage: concord "+userUsage)
		if len(args) == 0 {
			return usagef("user: say add")
		}
		return nil
	}
	if args[0] != "add" {
		return usagef("user: unknown action %q (add)", args[0])
	}
	fs := newFlagSet(e, "user add", userUsage)
	login := fs.String("login", "", "login name (a-z, 0-9, . _ @ + -)")
	role := fs.String("role", store.RoleLabeller, "lead or labeller")
	name := fs.String("name", "", "display name (default: the login)")
	project := fs.String("project", "", "also make the user a member of this project")
	pwStdin := fs.Bool("password-stdin", false, "read the password from the first line of standard input")
	if err := parseFlags(e, fs, args[1:]); err != nil {
		return err
	}
	if *login == "" {
		return usagef("user add: need --login")
	}
	if *role != store.RoleLead && *role != store.RoleLabeller {
		return usagef("user add: --role must be lead or labeller, not %q", *role)
	}
	if *name == "" {
		*name = *login
	}
	var hash string
	if *pwStdin {
		line, err := bufio.NewReader(e.stdin).ReadString('\n')
		pw := strings.TrimRight(line, "\r\n")
		if pw == "" {
			return usagef("user add: --password-stdin given but no password on standard input (%v)", err)
		}
		if hash, err = web.HashPassword(pw); err != nil {
			return err
		}
	}
	s, closeDB, err := openStore(ctx, e)
	if err != nil {
		return err
	}
	defer closeDB()
	var p store.Project
	if *project != "" {
		if p, err = s.ProjectBySlug(ctx, *project); err != nil {
			return err
		}
	}
	u, err := s.CreateUserIn(ctx, store.User{Login: *login, DisplayName: *name, Role: *role, PasswordHash: hash}, p.ID)
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "user %s (%s) added with id %d\n", u.Login, u.Role, u.ID)
	if hash == "" {
		fmt.Fprintln(e.stdout, "no password set: give one with --password-stdin, or invite the user from a project page")
	}
	return nil
}
