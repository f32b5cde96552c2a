package store

import (
	"context"
	"fmt"
)

// Sources of known answers.
const (
	GoldSourceGold = "gold" // imported gold item
	GoldSourceLead = "lead" // a lead's decision on a disputed item
)

// SetGoldAnswer stores or replaces an item's known answer (source gold or
// lead). The item becomes done at once with that label, so no further votes
// are asked for it except as a gold check.
func (s *Store) SetGoldAnswer(ctx context.Context, projectID, itemID, labelID int64, source string, decidedBy *int64) error {
	_, err := s.pool.Exec(ctx, `
		WITH g AS (
			INSERT INTO gold_answers (item_id, project_id, label_id, source, decided_by)
			VALUES ($1, $2, $3, $4, $5)
			ON CONFLICT (item_id) DO UPDATE SET label_id = excluded.label_id, source = excluded.source,
				decided_by = excluded.decided_by, created_at = now()
			RETURNING item_id
		), c AS (
			INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count,
				posterior_labels, posterior)
			SELECT $1, $2, $3, 1, $4, i.vote_count, ARRAY[$3::bigint], ARRAY[1::float8]
			FROM items i WHERE i.id = (SELECT item_id FROM g)
			ON CONFLICT (item_id) DO UPDATE SET label_id = excluded.label_id, confidence = 1,
				method = excluded.method, tied = false, rollup_label_id = NULL, rollup_confidence = NULL,
				posterior_labels = excluded.posterior_labels, posterior = excluded.posterior, updated_at = now()
		)
		UPDATE items SET status = 'done', votes_needed = 0, priority = 0 WHERE id = (SELECT item_id FROM g)`,
		itemID, projectID, labelID, source, decidedBy)
	if err != nil {
		return fmt.Errorf("set known answer of item %d: %w", itemID, mapErr(err))
	}
	return nil
}

// GoldLabels returns the project's known answers, label id by item id,
// for the engine to hold fixed.
func (s *Store) GoldLabels(ctx context.Context, projectID int64) (map[int64]int64, error) {
	rows, err := s.pool.Query(ctx, `SELECT item_id, label_id FROM gold_answers WHERE project_id = $1`, projectID)
	if err != nil {
		return nil, fmt.Errorf("known answers of project %d: %w", projectID, err)
	}
	defer rows.Close()
	out := map[int64]int64{}
	for rows.Next() {
		var item, label int64
		if err := rows.Scan(&item, &label); err != nil {
			return nil, fmt.Errorf("known answers of project %d: %w", projectID, err)
		}
		out[item] = label
	}
	return out, rows.Err()
}
