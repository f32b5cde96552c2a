package store

import (
	"context"
	"fmt"
)

// LabellerWork is what one labeller has done in a project, for pay.
type LabellerWork struct {
	User     User
	Votes    int     // every vote, "can't tell" included: all are paid
	Labelled int     // votes with a label
	Seconds  float64 // recorded time on the labelling screen
}

// WorkByLabeller sums each labeller's votes and recorded seconds in the
// project, most votes first. This is the one lead query that reads the
// votes themselves (labeller_stats keeps no time totals); it is a single
// grouped pass.
func (s *Store) WorkByLabeller(ctx context.Context, projectID int64) ([]LabellerWork, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT `+userCols+`, w.n, w.labelled, w.seconds
		FROM (SELECT labeller_id, count(*) AS n, count(label_id) AS labelled, coalesce(sum(seconds), 0)::float8 AS seconds
			FROM votes WHERE project_id = $1 GROUP BY labeller_id) w
		JOIN users u ON u.id = w.labeller_id
		ORDER BY w.n DESC, u.login`, projectID)
	if err != nil {
		return nil, fmt.Errorf("work by labeller in project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []LabellerWork
	for rows.Next() {
		var w LabellerWork
		u := &w.User
		if err := rows.Scan(&u.ID, &u.Login, &u.DisplayName, &u.Role, &u.PasswordHash, &u.Status, &u.CreatedAt,
			&w.Votes, &w.Labelled, &w.Seconds); err != nil {
			return nil, fmt.Errorf("work by labeller in project %d: %w", projectID, err)
		}
		out = append(out, w)
	}
	return out, rows.Err()
}

// LabelWork is the finished items of one consensus label and the labelled
// votes they took.
type LabelWork struct {
	Key, Name string
	Items     int
	Votes     int
}

// WorkByLabel groups the project's finished items by consensus label, in
// taxonomy key order. It reads items and consensus, not votes.
func (s *Store) WorkByLabel(ctx context.Context, projectID int64) ([]LabelWork, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT t.key, t.name, count(*), coalesce(sum(i.vote_count), 0)
		FROM items i JOIN consensus c ON c.item_id = i.id JOIN taxonomy_nodes t ON t.id = c.label_id
		WHERE i.project_id = $1 AND i.status = 'done'
		GROUP BY t.key, t.name ORDER BY t.key`, projectID)
	if err != nil {
		return nil, fmt.Errorf("work by label in project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []LabelWork
	for rows.Next() {
		var w LabelWork
		if err := rows.Scan(&w.Key, &w.Name, &w.Items, &w.Votes); err != nil {
			return nil, fmt.Errorf("work by label in project %d: %w", projectID, err)
		}
		out = append(out, w)
	}
	return out, rows.Err()
}
