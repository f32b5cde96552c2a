package store

import (
	"errors"
	"fmt"
	"net/url"
	"strings"

	"github.com/golang-migrate/migrate/v4"
	_ "github.com/golang-migrate/migrate/v4/database/pgx/v5" // pgx5:// driver
	"github.com/golang-migrate/migrate/v4/source/iofs"

	"github.com/concord-labs/concord/migrations"
)

// MigrationStatus is the schema version and whether a migration failed half-way.
type MigrationStatus struct {
	Version uint
	Dirty   bool
	Latest  uint
}

func newMigrate(dbURL string) (*migrate.Migrate, error) {
	src, err := iofs.New(migrations.FS, ".")
	if err != nil {
		return nil, fmt.Errorf("read embedded migrations: %w", err)
	}
	u, err := url.Parse(dbURL)
	if err != nil {
		return nil, fmt.Errorf("parse database URL: %w", err)
	}
	if u.Scheme == "postgres" || u.Scheme == "postgresql" {
		u.Scheme = "pgx5"
	}
	// pgxpool's own settings mean nothing to the migration connection (and
	// the server would reject them as unknown parameters).
	q := u.Query()
	for k := range q {
		if strings.HasPrefix(k, "pool_") {
			q.Del(k)
		}
	}
	u.RawQuery = q.Encode()
	m, err := migrate.NewWithSourceInstance("iofs", src, u.String())
	if err != nil {
		return nil, fmt.Errorf("open migrations: %w", err)
	}
	return m, nil
}

// MigrateUp applies every migration not yet applied.
func MigrateUp(dbURL string) error {
	m, err := newMigrate(dbURL)
	if err != nil {
		return err
	}
	defer m.Close()
	if err := m.Up(); err != nil && !errors.Is(err, migrate.ErrNoChange) {
		return fmt.Errorf("migrate up: %w", err)
	}
	return nil
}

// MigrateDown reverts steps migrations (all of them when steps <= 0).
func MigrateDown(dbURL string, steps int) error {
	m, err := newMigrate(dbURL)
	if err != nil {
		return err
	}
	defer m.Close()
	if steps <= 0 {
		err = m.Down()
	} else {
		err = m.Steps(-steps)
	}
	if err != nil && !errors.Is(err, migrate.ErrNoChange) {
		return fmt.Errorf("migrate down: %w", err)
	}
	return nil
}

// MigrationState reports the applied and latest available versions.
func MigrationState(dbURL string) (MigrationStatus, error) {
	m, err := newMigrate(dbURL)
	if err != nil {
		return MigrationStatus{}, err
	}
	defer m.Close()
	var st MigrationStatus
	v, dirty, err := m.Version()
	if err != nil && !errors.Is(err, migrate.ErrNilVersion) {
		return st, fmt.Errorf("read schema version: %w", err)
	}
	st.Version, st.Dirty = v, dirty
	entries, err := migrations.FS.ReadDir(".")
	if err != nil {
		return st, err
	}
	for _, e := range entries {
		var n uint
		if strings.HasSuffix(e.Name(), ".up.sql") {
			if _, err := fmt.Sscanf(e.Name(), "%d_", &n); err == nil && n > st.Latest {
				st.Latest = n
			}
		}
	}
	return st, nil
}
