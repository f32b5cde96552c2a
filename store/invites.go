package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Invite lets one person join a project as a labeller. Only the SHA-256 of
// its token is stored, so the table cannot be turned into working links.
type Invite struct {
	TokenHash []byte
	ProjectID int64
	CreatedBy int64
	CreatedAt time.Time
	ExpiresAt time.Time
	UsedBy    *int64
	UsedAt    *time.Time
}

const inviteColumns = `token_hash, project_id, created_by, created_at, expires_at, used_by, used_at`

func scanInvite(row pgx.Row) (Invite, error) {
	var i Invite
	err := row.Scan(&i.TokenHash, &i.ProjectID, &i.CreatedBy, &i.CreatedAt, &i.ExpiresAt, &i.UsedBy, &i.UsedAt)
	return i, err
}

// CreateInvite stores an invite to a project.
func (s *Store) CreateInvite(ctx context.Context, projectID, createdBy int64, tokenHash []byte, expires time.Time) (Invite, error) {
	inv, err := scanInvite(s.pool.QueryRow(ctx, `
		INSERT INTO invites (token_hash, project_id, created_by, expires_at) VALUES ($1, $2, $3, $4)
		RETURNING `+inviteColumns, tokenHash, projectID, createdBy, expires))
	if err != nil {
		return Invite{}, fmt.Errorf("create invite to project %d: %w", projectID, mapErr(err))
	}
	return inv, nil
}

// OpenInvite returns an unused, unexpired invite; ErrNotFound otherwise.
func (s *Store) OpenInvite(ctx context.Context, tokenHash []byte) (Invite, error) {
	inv, err := scanInvite(s.pool.QueryRow(ctx, `SELECT `+inviteColumns+` FROM invites
		WHERE token_hash = $1 AND used_by IS NULL AND expires_at > now()`, tokenHash))
	if err != nil {
		return Invite{}, fmt.Errorf("invite: %w", mapErr(err))
	}
	return inv, nil
}

// Invites lists a project's invites, newest first.
func (s *Store) Invites(ctx context.Context, projectID int64) ([]Invite, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+inviteColumns+` FROM invites WHERE project_id = $1 ORDER BY created_at DESC`, projectID)
	if err != nil {
		return nil, fmt.Errorf("invites of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []Invite
	for rows.Next() {
		inv, err := scanInvite(rows)
		if err != nil {
			return nil, fmt.Errorf("invites of project %d: %w", projectID, err)
		}
		out = append(out, inv)
	}
	return out, rows.Err()
}

// AcceptInvite uses an open invite: it creates the labeller u (its Role is
// forced to labeller), adds them to the project and marks the invite used,
// in one transaction, so an invite makes one account however often it is
// submitted. A taken login is ErrConflict; a used or expired invite ErrNotFound.
func (s *Store) AcceptInvite(ctx context.Context, tokenHash []byte, u User) (User, Invite, error) {
	var out User
	var inv Invite
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		inv, err = scanInvite(tx.QueryRow(ctx, `SELECT `+inviteColumns+` FROM invites
			WHERE token_hash = $1 AND used_by IS NULL AND expires_at > now() FOR UPDATE`, tokenHash))
		if err != nil {
			return err
		}
		out, err = createUser(ctx, tx, User{Login: u.Login, DisplayName: u.DisplayName, Role: RoleLabeller, PasswordHash: u.PasswordHash})
		if err != nil {
			return err
		}
		if err := addMember(ctx, tx, inv.ProjectID, out.ID); err != nil {
			return err
		}
		_, err = tx.Exec(ctx, `UPDATE invites SET used_by = $2, used_at = now() WHERE token_hash = $1`, tokenHash, out.ID)
		return err
	})
	if err != nil {
		return User{}, Invite{}, fmt.Errorf("accept invite as %q: %w", u.Login, mapErr(err))
	}
	return out, inv, nil
}
