package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Roles and statuses of users.
const (
	RoleLead     = "lead"
	RoleLabeller = "labeller"

	StatusActive  = "active"
	StatusPaused  = "paused"
	StatusBlocked = "blocked"
)

// User is a lead or a labeller.
type User struct {
	ID           int64
	Login        string
	DisplayName  string
	Role         string
	PasswordHash string
	Status       string
	CreatedAt    time.Time
}

const userColumns = `id, login, display_name, role, password_hash, status, created_at`

func scanUser(row interface{ Scan(...any) error }) (User, error) {
	var u User
	err := row.Scan(u.dest()...)
	return u, err
}

// dest lists u's fields in userColumns order, for a scan of a row that
// holds a user among other columns.
func (u *User) dest() []any {
	return []any{&u.ID, &u.Login, &u.DisplayName, &u.Role, &u.PasswordHash, &u.Status, &u.CreatedAt}
}

// CreateUser adds a user; the login must be unused (else ErrConflict).
func (s *Store) CreateUser(ctx context.Context, u User) (User, error) {
	out, err := createUser(ctx, s.pool, u)
	if err != nil {
		return User{}, fmt.Errorf("create user %q: %w", u.Login, mapErr(err))
	}
	return out, nil
}

// CreateUserIn adds a user and, when projectID is not 0, makes them a
// member of that project, in one transaction: a failed membership leaves
// no user behind.
func (s *Store) CreateUserIn(ctx context.Context, u User, projectID int64) (User, error) {
	if projectID == 0 {
		return s.CreateUser(ctx, u)
	}
	var out User
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		if out, err = createUser(ctx, tx, u); err != nil {
			return err
		}
		return addMember(ctx, tx, projectID, out.ID)
	})
	if err != nil {
		return User{}, fmt.Errorf("create user %q: %w", u.Login, mapErr(err))
	}
	return out, nil
}

func createUser(ctx context.Context, q querier, u User) (User, error) {
	if u.Status == "" {
		u.Status = StatusActive
	}
	row := q.QueryRow(ctx, `
		INSERT INTO users (login, display_name, role, password_hash, status)
		VALUES ($1, $2, $3, $4, $5)
		RETURNING `+userColumns, u.Login, u.DisplayName, u.Role, u.PasswordHash, u.Status)
	return scanUser(row)
}

// UserByID returns one user.
func (s *Store) UserByID(ctx context.Context, id int64) (User, error) {
	u, err := scanUser(s.pool.QueryRow(ctx, `SELECT `+userColumns+` FROM users WHERE id = $1`, id))
	if err != nil {
		return User{}, fmt.Errorf("user %d: %w", id, mapErr(err))
	}
	return u, nil
}

// UserByLogin returns the user with this login.
func (s *Store) UserByLogin(ctx context.Context, login string) (User, error) {
	u, err := scanUser(s.pool.QueryRow(ctx, `SELECT `+userColumns+` FROM users WHERE login = $1`, login))
	if err != nil {
		return User{}, fmt.Errorf("user %q: %w", login, mapErr(err))
	}
	return u, nil
}

// SetPasswordHash replaces a user's password hash.
func (s *Store) SetPasswordHash(ctx context.Context, id int64, hash string) error {
	tag, err := s.pool.Exec(ctx, `UPDATE users SET password_hash = $2 WHERE id = $1`, id, hash)
	if err != nil {
		return fmt.Errorf("set password of user %d: %w", id, mapErr(err))
	}
	if tag.RowsAffected() == 0 {
		return fmt.Errorf("set password of user %d: %w", id, ErrNotFound)
	}
	return nil
}

// SetUserStatus blocks or re-activates a user everywhere.
func (s *Store) SetUserStatus(ctx context.Context, id int64, status string) error {
	tag, err := s.pool.Exec(ctx, `UPDATE users SET status = $2 WHERE id = $1`, id, status)
	if err != nil {
		return fmt.Errorf("set status of user %d: %w", id, mapErr(err))
	}
	if tag.RowsAffected() == 0 {
		return fmt.Errorf("set status of user %d: %w", id, ErrNotFound)
	}
	return nil
}

// ListUsers returns every user, leads first, by login.
func (s *Store) ListUsers(ctx context.Context) ([]User, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+userColumns+` FROM users ORDER BY role, login`)
	if err != nil {
		return nil, fmt.Errorf("list users: %w", err)
	}
	defer rows.Close()
	var out []User
	for rows.Next() {
		u, err := scanUser(rows)
		if err != nil {
			return nil, fmt.Errorf("list users: %w", err)
		}
		out = append(out, u)
	}
	return out, rows.Err()
}
