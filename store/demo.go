package store

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"
)

// DeleteProject removes a project with everything that belongs to it
// (taxonomy, items, claims, votes, known answers, consensus, releases,
// statistics) in one transaction; the users stay. Deleting a missing
// project is ErrNotFound. Image bytes stay in the blob store: other
// projects may share them.
//
// The rows that point at taxonomy labels go first: a cascade from the
// project would reach the labels before the votes and consensus that name
// them, and their foreign keys would refuse.
func (s *Store) DeleteProject(ctx context.Context, id int64) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		for _, q := range []string{
			`DELETE FROM release_items WHERE release_id IN (SELECT id FROM releases WHERE project_id = $1)`,
			`DELETE FROM consensus WHERE project_id = $1`,
			`DELETE FROM gold_answers WHERE project_id = $1`,
			`DELETE FROM votes WHERE project_id = $1`,
		} {
			if _, err := tx.Exec(ctx, q, id); err != nil {
				return err
			}
		}
		tag, err := tx.Exec(ctx, `DELETE FROM projects WHERE id = $1`, id)
		if err != nil {
			return err
		}
		if tag.RowsAffected() == 0 {
			return ErrNotFound
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("delete project %d: %w", id, mapErr(err))
	}
	return nil
}
