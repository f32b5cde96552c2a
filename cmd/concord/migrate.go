package main

import (
	"context"
	"fmt"
	"strconv"

	"github.com/concord-labs/concord/store"
)

func runMigrate(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "migrate", "migrate up|down [N]|status")
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	if fs.NArg() == 0 {
		fs.Usage()
		return usagef("migrate: say up, down or status")
	}
	u, stop, err := databaseURL(ctx, e)
	if err != nil {
		return err
	}
	defer stop()
	switch fs.Arg(0) {
	case "up":
		if err := store.MigrateUp(u); err != nil {
			return err
		}
	case "down":
		steps := 1
		if fs.NArg() > 1 {
			if fs.Arg(1) == "all" {
				steps = 0
			} else if steps, err = strconv.Atoi(fs.Arg(1)); err != nil || steps < 1 {
				return usagef("migrate down: N must be a positive number or 'all', not %q", fs.Arg(1))
			}
		}
		if err := store.MigrateDown(u, steps); err != nil {
			return err
		}
	case "status":
	default:
		return usagef("migrate: unknown action %q (up, down or status)", fs.Arg(0))
	}
	st, err := store.MigrationState(u)
	if err != nil {
		return err
	}
	dirty := ""
	if st.Dirty {
		dirty = " (dirty: a migration failed half-way; fix it and force the version)"
	}
	fmt.Fprintf(e.stdout, "schema version %d of %d%s\n", st.Version, st.Latest, dirty)
	return nil
}
