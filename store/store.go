// Package store holds all of Concord's SQL. It wraps a pgx connection pool;
// every method takes a context first, writes its SQL out as literals, and owns
// its transaction when it changes more than one row. It must not import web
// or cmd. Missing rows come back as ErrNotFound and rule violations
// (uniqueness, foreign keys, checks) as ErrConflict, so handlers can map them
// to HTTP status codes.
package store

import (
	"context"
	"errors"
	"fmt"
	"runtime"
	"strings"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
)

var (
	// ErrNotFound means the row asked for does not exist (or is not visible to the caller).
	ErrNotFound = errors.New("not found")
	// ErrConflict means the change breaks a rule the schema enforces.
	ErrConflict = errors.New("conflict")
)

// ConflictError says which rule a change broke; errors.Is(err, ErrConflict) holds.
type ConflictError struct {
	Constraint string
	Detail     string
}

func (e *ConflictError) Error() string {
	if e.Detail != "" {
		return "conflict: " + e.Constraint + ": " + e.Detail
	}
	return "conflict: " + e.Constraint
}

func (e *ConflictError) Is(target error) bool { return target == ErrConflict }

// DefaultMaxConns is the pool size when the database URL does not set
// pool_max_conns: four connections a core, at least 8. On this project's
// 2-core machine 8 gave the most votes a second (4, 6, 8, 16 and 40 were
// measured with BenchmarkVoteAndClaim); more connections than the cores can
// serve only add switching. It stays well under PostgreSQL's default
// max_connections (100) so several servers can share one database.
var DefaultMaxConns = int32(max(8, 4*runtime.NumCPU()))

// Store is Concord's database.
type Store struct {
	pool  *pgxpool.Pool
	votes *voteBatcher
}

// Open connects to the database at url and checks that it answers.
func Open(ctx context.Context, url string) (*Store, error) {
	cfg, err := pgxpool.ParseConfig(url)
	if err != nil {
		return nil, fmt.Errorf("parse database URL: %w", err)
	}
	// pgxpool's default (the larger of 4 and the CPU count) queues a crowd of
	// labellers behind four connections; a vote holds one for a few ms, so
	// a larger pool keeps latency flat. pool_max_conns in the URL still wins.
	if !strings.Contains(url, "pool_max_conns") {
		cfg.MaxConns = DefaultMaxConns
	}
	pool, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("connect to database: %w", err)
	}
	if err := pool.Ping(ctx); err != nil {
		pool.Close()
		return nil, fmt.Errorf("connect to database: %w", err)
	}
	return New(pool), nil
}

// New wraps an existing pool.
func New(pool *pgxpool.Pool) *Store {
	return &Store{pool: pool, votes: newVoteBatcher(pool.Config().MaxConns)}
}

// Pool exposes the pool for readiness checks and the engine's advisory locks.
func (s *Store) Pool() *pgxpool.Pool { return s.pool }

// Close stops the vote workers and closes the pool.
func (s *Store) Close() {
	s.votes.close()
	s.pool.Close()
}

// Ping checks that the database answers (for /readyz).
func (s *Store) Ping(ctx context.Context) error { return s.pool.Ping(ctx) }

// querier is what a pool and a transaction have in common.
type querier interface {
	Exec(ctx context.Context, sql string, args ...any) (pgconn.CommandTag, error)
	Query(ctx context.Context, sql string, args ...any) (pgx.Rows, error)
	QueryRow(ctx context.Context, sql string, args ...any) pgx.Row
}

// inTx runs fn in a transaction, committing when fn returns nil. When
// PostgreSQL aborts the transaction to break a deadlock or a serialization
// conflict, fn runs again in a fresh transaction (up to txAttempts times):
// both are normal under concurrent voting and refitting, and the retry is
// safe because nothing of the aborted attempt was kept. fn must therefore
// not have effects outside the transaction.
func (s *Store) inTx(ctx context.Context, fn func(tx pgx.Tx) error) error {
	var err error
	for attempt := 1; attempt <= txAttempts; attempt++ {
		if err = s.tryTx(ctx, fn); !retryable(err) {
			return err
		}
	}
	return err
}

const txAttempts = 4

func (s *Store) tryTx(ctx context.Context, fn func(tx pgx.Tx) error) error {
	tx, err := s.pool.Begin(ctx)
	if err != nil {
		return err
	}
	defer tx.Rollback(context.Background())
	if err := fn(tx); err != nil {
		return err
	}
	return tx.Commit(ctx)
}

// retryable reports a deadlock (40P01) or serialization failure (40001).
func retryable(err error) bool {
	var pgErr *pgconn.PgError
	return errors.As(err, &pgErr) && (pgErr.Code == "40P01" || pgErr.Code == "40001")
}

// mapErr turns pgx's no-rows and constraint errors into ErrNotFound and
// *ConflictError; other errors pass through.
func mapErr(err error) error {
	if err == nil {
		return nil
	}
	if errors.Is(err, pgx.ErrNoRows) {
		return ErrNotFound
	}
	var pgErr *pgconn.PgError
	if errors.As(err, &pgErr) && len(pgErr.Code) == 5 && pgErr.Code[:2] == "23" {
		name := pgErr.ConstraintName
		if name == "" {
			name = pgErr.Message
		}
		return &ConflictError{Constraint: name, Detail: pgErr.Detail}
	}
	return err
}

// prefixed qualifies a column list with a table alias: "id, login" -> "u.id, u.login".
func prefixed(alias, columns string) string {
	parts := strings.Split(columns, ",")
	for i, p := range parts {
		parts[i] = alias + "." + strings.TrimSpace(p)
	}
	return strings.Join(parts, ", ")
}
