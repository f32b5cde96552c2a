package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// Item is one image of a project.
type Item struct {
	ID           int64
	ProjectID    int64
	SHA256       [32]byte
	FileKey      string // blob key of the original bytes
	ThumbKey     string // blob key of the thumbnail; "" when there is none
	OriginalName string
	MediaType    string
	Bytes        int64
	Width        int
	Height       int
	PHash        *uint64
	GroupKey     string
	ClusterID    *int64
	PriorLabel   string
	Status       string
	VoteCount    int
	CreatedAt    time.Time
}

// NewItem is an image to add; the database gives it its id.
type NewItem struct {
	SHA256       [32]byte
	FileKey      string
	ThumbKey     string
	OriginalName string
	MediaType    string
	Bytes        int64
	Width        int
	Height       int
	PHash        uint64
	GroupKey     string
	PriorLabel   string
}

// InsertItems adds items in one transaction. Items whose bytes the project
// holds already are left out (a resumed import meets them again); it
// returns the ids of the rows added, keyed by SHA-256.
func (s *Store) InsertItems(ctx context.Context, projectID int64, items []NewItem) (map[[32]byte]int64, error) {
	n := len(items)
	shas := make([][]byte, n)
	fileKeys, thumbKeys, names, types := make([]string, n), make([]*string, n), make([]string, n), make([]string, n)
	sizes, phashes := make([]int64, n), make([]int64, n)
	widths, heights := make([]int32, n), make([]int32, n)
	groups, priors := make([]*string, n), make([]*string, n)
	for i, it := range items {
		shas[i] = it.SHA256[:]
		fileKeys[i], names[i], types[i] = it.FileKey, it.OriginalName, it.MediaType
		thumbKeys[i], groups[i], priors[i] = textOrNull(it.ThumbKey), textOrNull(it.GroupKey), textOrNull(it.PriorLabel)
		sizes[i], phashes[i] = it.Bytes, int64(it.PHash)
		widths[i], heights[i] = int32(it.Width), int32(it.Height)
	}
	out := make(map[[32]byte]int64, n)
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		// Items are inserted in the order given so ids follow the import
		// order, which makes cluster ids (smallest id) reproducible.
		rows, err := tx.Query(ctx, `
			INSERT INTO items (project_id, sha256, file_key, thumb_key, original_name, media_type, bytes,
				width, height, phash, group_key, prior_label)
			SELECT $1, sha, fk, tk, nm, mt, sz, w, h, ph, g, pl
			FROM unnest($2::bytea[], $3::text[], $4::text[], $5::text[], $6::text[], $7::bigint[],
				$8::int[], $9::int[], $10::bigint[], $11::text[], $12::text[])
				WITH ORDINALITY AS u(sha, fk, tk, nm, mt, sz, w, h, ph, g, pl, ord)
			ORDER BY ord
			ON CONFLICT (project_id, sha256) DO NOTHING
			RETURNING id, sha256`,
			projectID, shas, fileKeys, thumbKeys, names, types, sizes, widths, heights, phashes, groups, priors)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var id int64
			var sha []byte
			if err := rows.Scan(&id, &sha); err != nil {
				return err
			}
			out[[32]byte(sha)] = id
		}
		return rows.Err()
	})
	if err != nil {
		return nil, fmt.Errorf("insert %d items into project %d: %w", n, projectID, mapErr(err))
	}
	return out, nil
}

// ItemSHAs returns the SHA-256 of every item of the project, so an import
// can skip what is in already without a query per file.
func (s *Store) ItemSHAs(ctx context.Context, projectID int64) (map[[32]byte]int64, error) {
	rows, err := s.pool.Query(ctx, `SELECT id, sha256 FROM items WHERE project_id = $1`, projectID)
	if err != nil {
		return nil, fmt.Errorf("item hashes of project %d: %w", projectID, err)
	}
	defer rows.Close()
	out := map[[32]byte]int64{}
	for rows.Next() {
		var id int64
		var sha []byte
		if err := rows.Scan(&id, &sha); err != nil {
			return nil, fmt.Errorf("item hashes of project %d: %w", projectID, err)
		}
		out[[32]byte(sha)] = id
	}
	return out, rows.Err()
}

// PerceptualHashes returns the ids, perceptual hashes and current cluster
// ids (0 when unset) of the project's items that have a hash, by id.
func (s *Store) PerceptualHashes(ctx context.Context, projectID int64) (ids []int64, hashes []uint64, clusters []int64, err error) {
	rows, err := s.pool.Query(ctx, `
		SELECT id, phash, coalesce(cluster_id, 0) FROM items
		WHERE project_id = $1 AND phash IS NOT NULL ORDER BY id`, projectID)
	if err != nil {
		return nil, nil, nil, fmt.Errorf("perceptual hashes of project %d: %w", projectID, err)
	}
	defer rows.Close()
	for rows.Next() {
		var id, h, c int64
		if err := rows.Scan(&id, &h, &c); err != nil {
			return nil, nil, nil, fmt.Errorf("perceptual hashes of project %d: %w", projectID, err)
		}
		ids, hashes, clusters = append(ids, id), append(hashes, uint64(h)), append(clusters, c)
	}
	return ids, hashes, clusters, rows.Err()
}

// SetClusters stores near-duplicate cluster ids (ids[i] gets clusters[i])
// in one statement.
func (s *Store) SetClusters(ctx context.Context, projectID int64, ids, clusters []int64) error {
	if len(ids) != len(clusters) {
		return fmt.Errorf("set clusters of project %d: %d ids but %d clusters", projectID, len(ids), len(clusters))
	}
	_, err := s.pool.Exec(ctx, `
		UPDATE items i SET cluster_id = u.cluster
		FROM unnest($2::bigint[], $3::bigint[]) AS u(id, cluster)
		WHERE i.project_id = $1 AND i.id = u.id AND i.cluster_id IS DISTINCT FROM u.cluster`,
		projectID, ids, clusters)
	if err != nil {
		return fmt.Errorf("set clusters of project %d: %w", projectID, mapErr(err))
	}
	return nil
}

const itemColumns = `id, project_id, sha256, file_key, coalesce(thumb_key, ''), original_name, media_type, bytes,
	width, height, phash, coalesce(group_key, ''), cluster_id, coalesce(prior_label, ''), status, vote_count, created_at`

func scanItem(row pgx.Row) (Item, error) {
	var it Item
	var sha []byte
	var ph *int64
	err := row.Scan(&it.ID, &it.ProjectID, &sha, &it.FileKey, &it.ThumbKey, &it.OriginalName, &it.MediaType,
		&it.Bytes, &it.Width, &it.Height, &ph, &it.GroupKey, &it.ClusterID, &it.PriorLabel, &it.Status,
		&it.VoteCount, &it.CreatedAt)
	if err != nil {
		return Item{}, err
	}
	it.SHA256 = [32]byte(sha)
	if ph != nil {
		u := uint64(*ph)
		it.PHash = &u
	}
	return it, nil
}

// Item returns one item of a project.
func (s *Store) Item(ctx context.Context, projectID, id int64) (Item, error) {
	it, err := scanItem(s.pool.QueryRow(ctx, `SELECT `+itemColumns+` FROM items WHERE project_id = $1 AND id = $2`, projectID, id))
	if err != nil {
		return Item{}, fmt.Errorf("item %d of project %d: %w", id, projectID, mapErr(err))
	}
	return it, nil
}

// ItemPage is a filter for Items: those with id > AfterID, at most Limit.
type ItemPage struct {
	AfterID   int64
	Limit     int
	ClusterID *int64
}

// Items lists a project's items by id, a page at a time.
func (s *Store) Items(ctx context.Context, projectID int64, page ItemPage) ([]Item, error) {
	if page.Limit <= 0 {
		page.Limit = 100
	}
	rows, err := s.pool.Query(ctx, `SELECT `+itemColumns+` FROM items
		WHERE project_id = $1 AND id > $2 AND ($3::bigint IS NULL OR cluster_id = $3)
		ORDER BY id LIMIT $4`, projectID, page.AfterID, page.ClusterID, page.Limit)
	if err != nil {
		return nil, fmt.Errorf("items of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []Item
	for rows.Next() {
		it, err := scanItem(rows)
		if err != nil {
			return nil, fmt.Errorf("items of project %d: %w", projectID, err)
		}
		out = append(out, it)
	}
	return out, rows.Err()
}

// ClusterCounts says how many near-duplicate clusters the project has with
// more than one item, and how many items they hold.
func (s *Store) ClusterCounts(ctx context.Context, projectID int64) (clusters, items int, err error) {
	err = s.pool.QueryRow(ctx, `
		SELECT count(*), coalesce(sum(n), 0) FROM (
			SELECT count(*) AS n FROM items WHERE project_id = $1 AND cluster_id IS NOT NULL
			GROUP BY cluster_id HAVING count(*) > 1) c`, projectID).Scan(&clusters, &items)
	if err != nil {
		return 0, 0, fmt.Errorf("cluster counts of project %d: %w", projectID, err)
	}
	return clusters, items, nil
}

func textOrNull(s string) *string {
	if s == "" {
		return nil
	}
	return &s
}
