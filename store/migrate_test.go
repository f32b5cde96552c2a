package store_test

import (
	"context"
	"strings"
	"testing"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/storetest"
)

func TestMigrationsUpDownUp(t *testing.T) {
	ctx := context.Background()
	db, err := storetest.Create(ctx, "migrate")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Drop(ctx) })

	st, err := store.MigrationState(db.URL)
	if err != nil {
		t.Fatal(err)
	}
	if st.Version != st.Latest || st.Dirty || st.Latest == 0 {
		t.Fatalf("after up: %+v, want version = latest > 0, clean", st)
	}
	if err := store.MigrateDown(db.URL, 0); err != nil {
		t.Fatal(err)
	}
	s := db.Open(t)
	var tables int
	if err := s.Pool().QueryRow(ctx, `SELECT count(*) FROM pg_tables WHERE schemaname = 'public' AND tablename <> 'schema_migrations'`).Scan(&tables); err != nil {
		t.Fatal(err)
	}
	if tables != 0 {
		t.Fatalf("after down: %d tables left", tables)
	}
	if err := store.MigrateUp(db.URL); err != nil {
		t.Fatal(err)
	}
	if _, err := s.CreateProject(ctx, store.Project{Slug: "after-up-again", Name: "x"}); err != nil {
		t.Fatalf("schema unusable after up/down/up: %v", err)
	}
}

func TestPoolSettingsInURL(t *testing.T) {
	ctx := context.Background()
	u := testDB.URL + "?pool_max_conns=7"
	if strings.Contains(testDB.URL, "?") {
		u = testDB.URL + "&pool_max_conns=7"
	}
	if err := store.MigrateUp(u); err != nil {
		t.Fatalf("migrate with a pool setting in the URL: %v", err)
	}
	s, err := store.Open(ctx, u)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if got := s.Pool().Config().MaxConns; got != 7 {
		t.Errorf("MaxConns = %d, want 7 from the URL", got)
	}
	d := testDB.Open(t)
	if got := d.Pool().Config().MaxConns; got != store.DefaultMaxConns {
		t.Errorf("default MaxConns = %d, want %d", got, store.DefaultMaxConns)
	}
}
