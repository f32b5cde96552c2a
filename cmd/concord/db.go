package main

import (
	"context"
	"fmt"
	"net/url"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/pglocal"
)

// defaultDatabase is the database Concord uses on a server it found itself.
const defaultDatabase = "concord"

// databaseURL returns DATABASE_URL, or finds a local server (127.0.0.1:5432,
// else a private cluster) and makes sure the concord database exists on it.
// The returned stop function stops a private cluster this process started.
func databaseURL(ctx context.Context, e *env) (string, func(), error) {
	if u := e.getenv("DATABASE_URL"); u != "" {
		return u, func() {}, nil
	}
	srv, err := pglocal.Find(ctx, e.logger, e.getenv("CONCORD_PGDATA"))
	if err != nil {
		return "", nil, err
	}
	stop := func() {
		if err := srv.Stop(); err != nil {
			e.logger.Warn("stop private PostgreSQL", "err", err)
		}
	}
	if err := pglocal.EnsureDatabase(ctx, srv.AdminURL, defaultDatabase); err != nil {
		stop()
		return "", nil, fmt.Errorf("create database %q: %w", defaultDatabase, err)
	}
	return srv.URL(defaultDatabase), stop, nil
}

// openStore connects to the database, migrating it up first, and returns a
// close function that also stops a private cluster this process started.
func openStore(ctx context.Context, e *env) (*store.Store, func(), error) {
	u, stop, err := databaseURL(ctx, e)
	if err != nil {
		return nil, nil, err
	}
	if err := store.MigrateUp(u); err != nil {
		stop()
		return nil, nil, fmt.Errorf("%w (database %s)", err, redact(u))
	}
	s, err := store.Open(ctx, u)
	if err != nil {
		stop()
		return nil, nil, fmt.Errorf("%w (database %s)", err, redact(u))
	}
	return s, func() { s.Close(); stop() }, nil
}

// redact hides a password in a database URL before it is printed.
func redact(u string) string {
	p, err := url.Parse(u)
	if err != nil {
		return "(unparsable URL)"
	}
	return p.Redacted()
}

// openProject opens the store and loads the project with this slug; the
// close function is nil when err is not.
func openProject(ctx context.Context, e *env, slug string) (*store.Store, store.Project, func(), error) {
	s, closeDB, err := openStore(ctx, e)
	if err != nil {
		return nil, store.Project{}, nil, err
	}
	p, err := s.ProjectBySlug(ctx, slug)
	if err != nil {
		closeDB()
		return nil, store.Project{}, nil, err
	}
	return s, p, closeDB, nil
}
