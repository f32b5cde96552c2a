package store

import (
	"context"
	"fmt"
	"time"
)

// Member is a labeller's place in a project.
type Member struct {
	ProjectID    int64
	User         User
	Status       string // active, paused or blocked
	StatusReason string
	JoinedAt     time.Time
}

// AddMember adds a user to a project; adding an existing member is a no-op.
func (s *Store) AddMember(ctx context.Context, projectID, userID int64) error {
	if err := addMember(ctx, s.pool, projectID, userID); err != nil {
		return fmt.Errorf("add user %d to project %d: %w", userID, projectID, mapErr(err))
	}
	return nil
}

func addMember(ctx context.Context, q querier, projectID, userID int64) error {
	_, err := q.Exec(ctx, `
		INSERT INTO project_members (project_id, user_id) VALUES ($1, $2)
		ON CONFLICT (project_id, user_id) DO NOTHING`, projectID, userID)
	return err
}

// SetMemberStatus pauses, resumes or blocks a labeller in one project: a
// lead's decision. It marks the labeller's gold figures of the last fit,
// so that AutoPause weighs only gold answers given after it.
func (s *Store) SetMemberStatus(ctx context.Context, projectID, userID int64, status, reason string) error {
	tag, err := s.pool.Exec(ctx, `
		UPDATE project_members SET status = $3, status_reason = $4,
			gold_correct_mark = coalesce((SELECT gold_correct FROM labeller_stats WHERE project_id = $1 AND user_id = $2), 0),
			gold_total_mark = coalesce((SELECT gold_total FROM labeller_stats WHERE project_id = $1 AND user_id = $2), 0)
		WHERE project_id = $1 AND user_id = $2`,
		projectID, userID, status, reason)
	if err != nil {
		return fmt.Errorf("set status of user %d in project %d: %w", userID, projectID, mapErr(err))
	}
	if tag.RowsAffected() == 0 {
		return fmt.Errorf("set status of user %d in project %d: %w", userID, projectID, ErrNotFound)
	}
	return nil
}

// MemberOf returns a user's membership of a project, ErrNotFound if none.
func (s *Store) MemberOf(ctx context.Context, projectID, userID int64) (Member, error) {
	m := Member{ProjectID: projectID}
	err := s.pool.QueryRow(ctx, `
		SELECT m.status, m.status_reason, m.joined_at, `+prefixed("u", userColumns)+`
		FROM project_members m JOIN users u ON u.id = m.user_id
		WHERE m.project_id = $1 AND m.user_id = $2`, projectID, userID).
		Scan(append([]any{&m.Status, &m.StatusReason, &m.JoinedAt}, m.User.dest()...)...)
	if err != nil {
		return Member{}, fmt.Errorf("membership of user %d in project %d: %w", userID, projectID, mapErr(err))
	}
	return m, nil
}

// Members lists a project's members by login.
func (s *Store) Members(ctx context.Context, projectID int64) ([]Member, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT m.status, m.status_reason, m.joined_at, `+prefixed("u", userColumns)+`
		FROM project_members m JOIN users u ON u.id = m.user_id
		WHERE m.project_id = $1 ORDER BY u.login`, projectID)
	if err != nil {
		return nil, fmt.Errorf("members of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []Member
	for rows.Next() {
		m := Member{ProjectID: projectID}
		if err := rows.Scan(append([]any{&m.Status, &m.StatusReason, &m.JoinedAt}, m.User.dest()...)...); err != nil {
			return nil, fmt.Errorf("members of project %d: %w", projectID, err)
		}
		out = append(out, m)
	}
	return out, rows.Err()
}
