package store

import (
	"context"
	"fmt"
	"time"
)

// CreateSession stores a session for a user; idHash is the SHA-256 of the
// cookie token, so a leaked table does not leak live cookies.
func (s *Store) CreateSession(ctx context.Context, idHash []byte, userID int64, expires time.Time) error {
	_, err := s.pool.Exec(ctx, `INSERT INTO sessions (id_hash, user_id, expires_at) VALUES ($1, $2, $3)`, idHash, userID, expires)
	if err != nil {
		return fmt.Errorf("create session for user %d: %w", userID, mapErr(err))
	}
	return nil
}

// SessionUser returns the user of a live session; ErrNotFound when the
// session does not exist, has expired, or its user is blocked.
func (s *Store) SessionUser(ctx context.Context, idHash []byte) (User, error) {
	u, err := scanUser(s.pool.QueryRow(ctx, `
		SELECT `+prefixed("u", userColumns)+`
		FROM sessions s JOIN users u ON u.id = s.user_id
		WHERE s.id_hash = $1 AND s.expires_at > now() AND u.status = 'active'`, idHash))
	if err != nil {
		return User{}, fmt.Errorf("session: %w", mapErr(err))
	}
	return u, nil
}

// DeleteSession ends a session (logout). Deleting a missing session is not an error.
func (s *Store) DeleteSession(ctx context.Context, idHash []byte) error {
	if _, err := s.pool.Exec(ctx, `DELETE FROM sessions WHERE id_hash = $1`, idHash); err != nil {
		return fmt.Errorf("delete session: %w", err)
	}
	return nil
}

// DeleteExpiredSessions removes sessions past their expiry and login
// failures older than keep; it returns how many sessions went.
func (s *Store) DeleteExpiredSessions(ctx context.Context, keep time.Duration) (int64, error) {
	tag, err := s.pool.Exec(ctx, `DELETE FROM sessions WHERE expires_at <= now()`)
	if err != nil {
		return 0, fmt.Errorf("delete expired sessions: %w", err)
	}
	if _, err := s.pool.Exec(ctx, `DELETE FROM login_failures WHERE at < now() - $1::interval`, keep.String()); err != nil {
		return 0, fmt.Errorf("delete old login failures: %w", err)
	}
	return tag.RowsAffected(), nil
}

// RecordLoginFailure notes a failed login for rate limiting.
func (s *Store) RecordLoginFailure(ctx context.Context, login, address string) error {
	if _, err := s.pool.Exec(ctx, `INSERT INTO login_failures (login, address) VALUES ($1, $2)`, login, address); err != nil {
		return fmt.Errorf("record login failure: %w", err)
	}
	return nil
}

// LoginFailures counts failed logins since a time, for one login and for one address.
func (s *Store) LoginFailures(ctx context.Context, login, address string, since time.Time) (byLogin, byAddress int, err error) {
	err = s.pool.QueryRow(ctx, `
		SELECT (SELECT count(*) FROM login_failures WHERE login = $1 AND at > $3),
		       (SELECT count(*) FROM login_failures WHERE address = $2 AND at > $3)`,
		login, address, since).Scan(&byLogin, &byAddress)
	if err != nil {
		return 0, 0, fmt.Errorf("count login failures: %w", err)
	}
	return byLogin, byAddress, nil
}

// ClearLoginFailures forgets a login's failures after it succeeds.
func (s *Store) ClearLoginFailures(ctx context.Context, login string) error {
	if _, err := s.pool.Exec(ctx, `DELETE FROM login_failures WHERE login = $1`, login); err != nil {
		return fmt.Errorf("clear login failures: %w", err)
	}
	return nil
}
