package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
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
// (project_id, created_at) index.
func (s *Store) WorkByLabeller(ctx context.Context, projectID int64) ([]LabellerWork, error) {
	var out []LabellerWork
	err := s.readCounted(ctx, projectID, func(tx pgx.Tx, until, _ time.Time) error {
		rows, err := tx.Query(ctx, `
			SELECT `+userCols+`, w.n, w.labelled, w.seconds
			FROM (SELECT labeller_id, sum(n)::int AS n, sum(labelled)::int AS labelled, sum(seconds)::float8 AS seconds
				FROM (
					SELECT user_id AS labeller_id, votes_all AS n, votes_all - cant_tell AS labelled, seconds_total AS seconds
					FROM labeller_stats WHERE project_id = $1 AND votes_all > 0
					UNION ALL
					SELECT labeller_id, count(*), count(label_id), coalesce(sum(seconds::float8), 0)
					FROM votes WHERE project_id = $1 AND created_at >= $2
					GROUP BY labeller_id
				) x GROUP BY labeller_id) w
			JOIN users u ON u.id = w.labeller_id
			ORDER BY w.n DESC, u.login`, projectID, until)
		if err != nil {
			return err
		}
		var w LabellerWork
		_, err = pgx.ForEachRow(rows, append(w.User.dest(), &w.Votes, &w.Labelled, &w.Seconds), func() error {
			out = append(out, w)
			return nil
		})
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("work by labeller in project %d: %w", projectID, err)
	}
	return out, nil
}

// LabelWork is the finished items of one consensus label and the labelled
// votes they took, as of a refit (ProjectSummary.ByLabel).
type LabelWork struct {
	Key   string `json:"key"`
	Name  string `json:"name"`
	Items int    `json:"items"`
	Votes int    `json:"votes"`
}
