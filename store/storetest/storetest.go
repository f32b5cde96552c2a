// Package storetest gives each test package a throwaway, migrated database on
// a real PostgreSQL server, found or started by the same rule as the concord
// binary (DATABASE_URL, else 127.0.0.1:5432, else a private cluster).
package storetest

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"fmt"
	"net/url"
	"os"
	"testing"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/pglocal"
)

// DB is a throwaway database for one test package.
type DB struct {
	URL      string
	Name     string
	adminURL string
	server   *pglocal.Server
}

// Main creates a fresh migrated database, runs the package's tests, and drops
// it. Call it from TestMain: os.Exit(storetest.Main(m, &db)).
func Main(m *testing.M, out **DB) int {
	ctx := context.Background()
	db, err := Create(ctx, "test")
	if err != nil {
		fmt.Fprintln(os.Stderr, "storetest:", err)
		return 1
	}
	*out = db
	code := m.Run()
	if err := db.Drop(ctx); err != nil {
		fmt.Fprintln(os.Stderr, "storetest: drop:", err)
	}
	return code
}

// Create makes a new database named concord_<prefix>_<random>, migrated up.
func Create(ctx context.Context, prefix string) (*DB, error) {
	admin := os.Getenv("DATABASE_URL")
	var srv *pglocal.Server
	if admin == "" {
		var err error
		srv, err = pglocal.Find(ctx, nil, "")
		if err != nil {
			return nil, err
		}
		admin = srv.AdminURL
	}
	b := make([]byte, 6)
	rand.Read(b)
	name := "concord_" + prefix + "_" + hex.EncodeToString(b)
	if err := pglocal.EnsureDatabase(ctx, admin, name); err != nil {
		return nil, fmt.Errorf("create test database: %w", err)
	}
	u, err := url.Parse(admin)
	if err != nil {
		return nil, err
	}
	u.Path = "/" + name
	db := &DB{URL: u.String(), Name: name, adminURL: admin, server: srv}
	if err := store.MigrateUp(db.URL); err != nil {
		db.Drop(ctx)
		return nil, err
	}
	return db, nil
}

// Drop removes the database.
func (d *DB) Drop(ctx context.Context) error {
	return pglocal.DropDatabase(ctx, d.adminURL, d.Name)
}

// Open returns a Store on the database, closed when the test ends.
func (d *DB) Open(t testing.TB) *store.Store {
	t.Helper()
	s, err := store.Open(context.Background(), d.URL)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(s.Close)
	return s
}
