package store

import (
	"context"
	"fmt"
)

// DeleteProject removes a project with everything that belongs to it
// (taxonomy, items, claims, votes, known answers, consensus, releases,
// statistics) in one statement; the users stay. Deleting a missing project
// is ErrNotFound. Image bytes stay in the blob store: other projects may
// share them.
func (s *Store) DeleteProject(ctx context.Context, id int64) error {
	tag, err := s.pool.Exec(ctx, `DELETE FROM projects WHERE id = $1`, id)
	if err != nil {
		return fmt.Errorf("delete project %d: %w", id, mapErr(err))
	}
	if tag.RowsAffected() == 0 {
		return fmt.Errorf("delete project %d: %w", id, ErrNotFound)
	}
	return nil
}
