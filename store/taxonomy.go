package store

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"

	"github.com/concord-labs/concord/taxonomy"
)

// Label is one node of a project's taxonomy as stored.
type Label struct {
	ID          int64
	ProjectID   int64
	ParentID    *int64
	Key         string
	Name        string
	Description string
	Position    int
	Depth       int
	IsLeaf      bool
}

// LabelInput is one node to store, in pre-order: Parent is the index of its
// parent in the same slice (-1 for a root), so parents always come first.
type LabelInput struct {
	Key, Name, Description string
	Parent                 int
}

// ReplaceTaxonomy makes the project's taxonomy exactly nodes, in one
// transaction: nodes are matched by key, so votes on a kept key stay attached
// when names, descriptions or places change. Removing a key that votes,
// gold answers or consensus still use fails with ErrConflict and changes nothing.
func (s *Store) ReplaceTaxonomy(ctx context.Context, projectID int64, nodes []LabelInput) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error { return replaceTaxonomy(ctx, tx, projectID, nodes) })
	if err != nil {
		return fmt.Errorf("replace taxonomy of project %d: %w", projectID, mapErr(err))
	}
	return nil
}

func replaceTaxonomy(ctx context.Context, tx pgx.Tx, projectID int64, nodes []LabelInput) error {
	// Lock the project so two imports cannot interleave.
	var one int
	if err := tx.QueryRow(ctx, `SELECT 1 FROM projects WHERE id = $1 FOR UPDATE`, projectID).Scan(&one); err != nil {
		return err
	}
	ids := make([]int64, len(nodes))
	depth := make([]int, len(nodes))
	pos := make([]int, len(nodes))
	leaf := make([]bool, len(nodes))
	children := map[int]int{}
	for i := range nodes {
		leaf[i] = true
	}
	for i, n := range nodes {
		if n.Parent >= i {
			return fmt.Errorf("node %d (%s): parent %d does not come before it", i, n.Key, n.Parent)
		}
		if n.Parent >= 0 {
			depth[i] = depth[n.Parent] + 1
			leaf[n.Parent] = false
		}
		pos[i] = children[n.Parent]
		children[n.Parent]++
	}
	keys := make([]string, len(nodes))
	for i, n := range nodes {
		keys[i] = n.Key
		var parent *int64
		if n.Parent >= 0 {
			parent = &ids[n.Parent]
		}
		name := n.Name
		if name == "" {
			name = n.Key
		}
		err := tx.QueryRow(ctx, `
			INSERT INTO taxonomy_nodes (project_id, parent_id, key, name, description, position, depth, is_leaf)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8)
			ON CONFLICT (project_id, key) DO UPDATE SET parent_id = excluded.parent_id, name = excluded.name,
				description = excluded.description, position = excluded.position, depth = excluded.depth,
				is_leaf = excluded.is_leaf
			RETURNING id`, projectID, parent, n.Key, name, n.Description, pos[i], depth[i], leaf[i]).Scan(&ids[i])
		if err != nil {
			return fmt.Errorf("node %q: %w", n.Key, err)
		}
	}
	_, err := tx.Exec(ctx, `DELETE FROM taxonomy_nodes WHERE project_id = $1 AND key <> ALL($2)`, projectID, keys)
	if err != nil {
		return fmt.Errorf("remove labels no longer in the taxonomy: %w", err)
	}
	return nil
}

// Labels returns the project's taxonomy in pre-order (parents before
// children, siblings by position).
func (s *Store) Labels(ctx context.Context, projectID int64) ([]Label, error) {
	rows, err := s.pool.Query(ctx, `
		WITH RECURSIVE t AS (
			SELECT id, ARRAY[position] AS path FROM taxonomy_nodes WHERE project_id = $1 AND parent_id IS NULL
			UNION ALL
			SELECT n.id, t.path || n.position FROM taxonomy_nodes n JOIN t ON n.parent_id = t.id
		)
		SELECT n.id, n.project_id, n.parent_id, n.key, n.name, n.description, n.position, n.depth, n.is_leaf
		FROM taxonomy_nodes n JOIN t USING (id)
		ORDER BY t.path`, projectID)
	if err != nil {
		return nil, fmt.Errorf("labels of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []Label
	for rows.Next() {
		var l Label
		if err := rows.Scan(&l.ID, &l.ProjectID, &l.ParentID, &l.Key, &l.Name, &l.Description, &l.Position, &l.Depth, &l.IsLeaf); err != nil {
			return nil, fmt.Errorf("labels of project %d: %w", projectID, err)
		}
		out = append(out, l)
	}
	return out, rows.Err()
}

// LabelInputsOf converts a parsed taxonomy into ReplaceTaxonomy's input.
func LabelInputsOf(t *taxonomy.Taxonomy) []LabelInput {
	out := make([]LabelInput, t.Len())
	for i := range out {
		n := t.Node(i)
		out[i] = LabelInput{Key: n.Key, Name: n.Name, Description: n.Description, Parent: n.Parent}
	}
	return out
}

// Taxonomy returns the project's taxonomy as a tree, with the stored labels
// in the same pre-order (labels[i] is node i of the tree).
func (s *Store) Taxonomy(ctx context.Context, projectID int64) (*taxonomy.Taxonomy, []Label, error) {
	labels, err := s.Labels(ctx, projectID)
	if err != nil {
		return nil, nil, err
	}
	if len(labels) == 0 {
		return nil, nil, fmt.Errorf("taxonomy of project %d: none imported yet: %w", projectID, ErrNotFound)
	}
	index := make(map[int64]int, len(labels))
	children := make([][]int, len(labels))
	var rootIdx []int
	for i, l := range labels {
		index[l.ID] = i
		if l.ParentID == nil {
			rootIdx = append(rootIdx, i)
		} else {
			pi := index[*l.ParentID] // pre-order: the parent is already indexed
			children[pi] = append(children[pi], i)
		}
	}
	var build func(idx []int) []taxonomy.Label
	build = func(idx []int) []taxonomy.Label {
		out := make([]taxonomy.Label, len(idx))
		for k, i := range idx {
			l := labels[i]
			out[k] = taxonomy.Label{Key: l.Key, Name: l.Name, Description: l.Description, Children: build(children[i])}
		}
		return out
	}
	roots := build(rootIdx)
	t, err := taxonomy.New(roots)
	if err != nil {
		return nil, nil, fmt.Errorf("taxonomy of project %d: %w", projectID, err)
	}
	return t, labels, nil
}
