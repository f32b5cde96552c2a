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
// project, most votes first: the totals the last refit counted
// (labeller_stats) plus the votes created since, a short range of the
// (project_id, created_at) index, in one statement so both parts come from
// one snapshot.
func (s *Store) WorkByLabeller(ctx context.Context, projectID int64) ([]LabellerWork, error) {
	rows, err := s.pool.Query(ctx, `
		WITH `+countedUntil+`
		SELECT `+userCols+`, w.n, w.labelled, w.seconds
		FROM (SELECT labeller_id, sum(n)::int AS n, sum(labelled)::int AS labelled, sum(seconds)::float8 AS seconds
			FROM (
				SELECT user_id AS labeller_id, votes_all AS n, votes_all - cant_tell AS labelled, seconds_total AS seconds
				FROM labeller_stats WHERE project_id = $1 AND votes_all > 0
				UNION ALL
				SELECT v.labeller_id, count(*), count(v.label_id), coalesce(sum(v.seconds::float8), 0)
				FROM votes v, counted c WHERE v.project_id = $1 AND v.created_at >= c.until
				GROUP BY v.labeller_id
			) x GROUP BY labeller_id) w
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
// votes they took, as of a refit (ProjectSummary.ByLabel).
type LabelWork struct {
	Key   string `json:"key"`
	Name  string `json:"name"`
	Items int    `json:"items"`
	Votes int    `json:"votes"`
}
