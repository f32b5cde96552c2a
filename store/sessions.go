package store

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
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

var sessionUserSQL = `
	SELECT ` + prefixed("u", userColumns) + `
	FROM sessions s JOIN users u ON u.id = s.user_id
	WHERE s.id_hash = $1 AND s.expires_at > now() AND u.status = 'active'`

// SessionUser returns the user of a live session; ErrNotFound when the
// session does not exist, has expired, or its user is blocked.
func (s *Store) SessionUser(ctx context.Context, idHash []byte) (User, error) {
	u, err := scanUser(s.pool.QueryRow(ctx, sessionUserSQL, idHash))
	if err != nil {
		return User{}, fmt.Errorf("session: %w", mapErr(err))
	}
	return u, nil
}

// ProjectAccess is what a project's page or API call needs to know about
// its caller.
type ProjectAccess struct {
	User User
	// Project is nil when no project has the slug.
	Project *Project
	// Member is nil when the user is not a member of the project.
	Member *Member
}

// SessionProjectAccess returns the user of a live session, the project
// with the slug and the user's membership of it, in one statement when
// the project exists (a labeller's every vote starts here). ErrNotFound
// when the session is not live, as SessionUser.
func (s *Store) SessionProjectAccess(ctx context.Context, idHash []byte, slug string) (ProjectAccess, error) {
	var a ProjectAccess
	var memberStatus, memberReason *string
	var joined *time.Time
	u := &a.User
	p, err := scanProject(withExtra{
		Row: s.pool.QueryRow(ctx, `
			SELECT `+prefixed("u", userColumns)+`, `+prefixed("p", projectColumns)+`,
				m.status, m.status_reason, m.joined_at
			FROM sessions s
			JOIN users u ON u.id = s.user_id
			JOIN projects p ON p.slug = $2
			LEFT JOIN project_members m ON m.project_id = p.id AND m.user_id = u.id
			WHERE s.id_hash = $1 AND s.expires_at > now() AND u.status = 'active'`, idHash, slug),
		lead:  u.dest(),
		extra: []any{&memberStatus, &memberReason, &joined},
	})
	if errors.Is(err, pgx.ErrNoRows) {
		// No such project, or no live session: SessionUser tells which.
		a.User, err = s.SessionUser(ctx, idHash)
		return a, err
	}
	if err != nil {
		return ProjectAccess{}, fmt.Errorf("session access to project %q: %w", slug, err)
	}
	a.Project = &p
	if memberStatus != nil {
		a.Member = &Member{ProjectID: p.ID, User: a.User, Status: *memberStatus, StatusReason: *memberReason, JoinedAt: *joined}
	}
	return a, nil
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
