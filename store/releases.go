package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// ReleaseCandidate is an item with what a release needs to label and split
// it: its consensus (if any) and a lead's decision (if any).
type ReleaseCandidate struct {
	ID               int64
	SHA256           [32]byte
	MediaType        string
	ClusterID        int64 // 0 when unset
	GroupKey         string
	Votes            int
	LabelID          int64 // consensus label, 0 when none
	Confidence       float64
	RollupLabelID    int64
	RollupConfidence float64
	PosteriorLabels  []int64
	Posterior        []float64
	LeadLabelID      int64 // gold_answers with source 'lead', 0 when none
}

// ReleaseCandidates returns every item of the project, by id, joined with
// its consensus and lead decision.
func (s *Store) ReleaseCandidates(ctx context.Context, projectID int64) ([]ReleaseCandidate, error) {
	var n int
	if err := s.pool.QueryRow(ctx, `SELECT count(*) FROM items WHERE project_id = $1`, projectID).Scan(&n); err != nil {
		return nil, fmt.Errorf("release candidates of project %d: %w", projectID, err)
	}
	rows, err := s.pool.Query(ctx, `
		SELECT i.id, i.sha256, i.media_type, coalesce(i.cluster_id, 0), coalesce(i.group_key, ''),
			coalesce(c.vote_count, i.vote_count), coalesce(c.label_id, 0), coalesce(c.confidence, 0),
			coalesce(c.rollup_label_id, 0), coalesce(c.rollup_confidence, 0),
			coalesce(c.posterior_labels, '{}'), coalesce(c.posterior, '{}'), coalesce(g.label_id, 0)
		FROM items i
		LEFT JOIN consensus c ON c.item_id = i.id
		LEFT JOIN gold_answers g ON g.item_id = i.id AND g.source = 'lead'
		WHERE i.project_id = $1
		ORDER BY i.id`, projectID)
	if err != nil {
		return nil, fmt.Errorf("release candidates of project %d: %w", projectID, err)
	}
	defer rows.Close()
	// Growing a slice of a million candidates by append copied it ~20
	// times; the count is one index-only scan.
	out := make([]ReleaseCandidate, 0, n)
	var sha []byte
	for rows.Next() {
		out = append(out, ReleaseCandidate{})
		c := &out[len(out)-1]
		if err := rows.Scan(&c.ID, &sha, &c.MediaType, &c.ClusterID, &c.GroupKey, &c.Votes, &c.LabelID, &c.Confidence,
			&c.RollupLabelID, &c.RollupConfidence, &c.PosteriorLabels, &c.Posterior, &c.LeadLabelID); err != nil {
			return nil, fmt.Errorf("release candidates of project %d: %w", projectID, err)
		}
		c.SHA256 = [32]byte(sha)
	}
	return out, rows.Err()
}

// Release is a recorded dataset release. Releases are immutable.
type Release struct {
	ID             int64
	ProjectID      int64
	Name           string
	Seed           int64
	SplitTrain     int
	SplitVal       int
	SplitTest      int
	MinConfidence  float64
	Level          *int // nil: leaf labels
	Formats        string
	ItemCount      int
	ManifestSHA256 [32]byte
	Card           string
	// ReleaseJSON is release.json as first issued and Taxonomy the
	// taxonomy it was cut with (the taxonomy package's JSON form); both are
	// nil for releases recorded before migration 0005.
	ReleaseJSON []byte
	Taxonomy    json.RawMessage
	CreatedBy   *int64
	CreatedAt   time.Time
}

// ReleaseItem is one item's place in a release.
type ReleaseItem struct {
	ItemID     int64
	Split      string
	LabelKey   string
	Confidence float64
	Votes      int
	GroupKey   string
}

const releaseColumns = `id, project_id, name, seed, split_train, split_val, split_test, min_confidence, level,
	formats, item_count, manifest_sha256, card, release_json, taxonomy, created_by, created_at`

func scanRelease(row pgx.Row) (Release, error) {
	var r Release
	var sha []byte
	err := row.Scan(&r.ID, &r.ProjectID, &r.Name, &r.Seed, &r.SplitTrain, &r.SplitVal, &r.SplitTest, &r.MinConfidence,
		&r.Level, &r.Formats, &r.ItemCount, &sha, &r.Card, &r.ReleaseJSON, &r.Taxonomy, &r.CreatedBy, &r.CreatedAt)
	if err == nil {
		r.ManifestSHA256 = [32]byte(sha)
	}
	return r, err
}

// CreateRelease records a release and its items in one transaction. A name
// the project has used already fails with ErrConflict, and so does an item
// that is not an item of the project.
//
// release_items has no foreign key to items (a per-row check made a large
// release several times slower; see migration 0003): the items are copied
// into a staging table and moved with one INSERT ... SELECT joined to the
// project's items, so an item the project does not hold is refused here.
func (s *Store) CreateRelease(ctx context.Context, r Release, items []ReleaseItem) (Release, error) {
	var out Release
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		out, err = scanRelease(tx.QueryRow(ctx, `
			INSERT INTO releases (project_id, name, seed, split_train, split_val, split_test, min_confidence, level,
				formats, item_count, manifest_sha256, card, release_json, taxonomy, created_by)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15)
			RETURNING `+releaseColumns,
			r.ProjectID, r.Name, r.Seed, r.SplitTrain, r.SplitVal, r.SplitTest, r.MinConfidence, r.Level,
			r.Formats, len(items), r.ManifestSHA256[:], r.Card, nullText(r.ReleaseJSON), nullJSON(r.Taxonomy), r.CreatedBy))
		if err != nil {
			return err
		}
		_, err = tx.Exec(ctx, `CREATE TEMP TABLE release_stage (item_id bigint, split text, label_key text,
			confidence double precision, votes integer, group_key text) ON COMMIT DROP`)
		if err != nil {
			return err
		}
		row := make([]any, 6)
		_, err = tx.CopyFrom(ctx, pgx.Identifier{"release_stage"},
			[]string{"item_id", "split", "label_key", "confidence", "votes", "group_key"},
			pgx.CopyFromSlice(len(items), func(i int) ([]any, error) {
				it := &items[i]
				row[0], row[1], row[2], row[3], row[4], row[5] = it.ItemID, it.Split, it.LabelKey, it.Confidence, int32(it.Votes), it.GroupKey
				return row, nil
			}))
		if err != nil {
			return err
		}
		tag, err := tx.Exec(ctx, `
			INSERT INTO release_items (release_id, item_id, split, label_key, confidence, votes, group_key)
			SELECT $1, st.item_id, st.split, st.label_key, st.confidence, st.votes, st.group_key
			FROM release_stage st JOIN items i ON i.id = st.item_id AND i.project_id = $2`, out.ID, r.ProjectID)
		if err != nil {
			return err
		}
		if missing := int64(len(items)) - tag.RowsAffected(); missing != 0 {
			return &ConflictError{Constraint: "release_items_item_of_project",
				Detail: fmt.Sprintf("%d of the release's %d items are not items of the project", missing, len(items))}
		}
		return nil
	})
	if err != nil {
		return Release{}, fmt.Errorf("record release %q of project %d: %w", r.Name, r.ProjectID, mapErr(err))
	}
	return out, nil
}

// nullText stores nil as NULL and other bytes as text (pgx would send
// []byte as bytea).
func nullText(b []byte) *string {
	if b == nil {
		return nil
	}
	s := string(b)
	return &s
}

// nullJSON stores an empty document as NULL.
func nullJSON(b json.RawMessage) any {
	if len(b) == 0 {
		return nil
	}
	return string(b)
}

// Releases lists a project's releases, newest first, without their cards
// and snapshots.
func (s *Store) Releases(ctx context.Context, projectID int64) ([]Release, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+releaseColumns+` FROM releases WHERE project_id = $1 ORDER BY id DESC`, projectID)
	if err != nil {
		return nil, fmt.Errorf("releases of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []Release
	for rows.Next() {
		r, err := scanRelease(rows)
		if err != nil {
			return nil, fmt.Errorf("releases of project %d: %w", projectID, err)
		}
		r.Card, r.ReleaseJSON, r.Taxonomy = "", nil, nil
		out = append(out, r)
	}
	return out, rows.Err()
}

// ReleaseByName returns one release of a project.
func (s *Store) ReleaseByName(ctx context.Context, projectID int64, name string) (Release, error) {
	r, err := scanRelease(s.pool.QueryRow(ctx, `SELECT `+releaseColumns+` FROM releases WHERE project_id = $1 AND name = $2`, projectID, name))
	if err != nil {
		return Release{}, fmt.Errorf("release %q of project %d: %w", name, projectID, mapErr(err))
	}
	return r, nil
}

// ReleaseItems returns a release's items by id.
func (s *Store) ReleaseItems(ctx context.Context, releaseID int64) ([]ReleaseItem, error) {
	rows, err := s.pool.Query(ctx, `SELECT item_id, split, label_key, confidence, votes, group_key
		FROM release_items WHERE release_id = $1 ORDER BY item_id`, releaseID)
	if err != nil {
		return nil, fmt.Errorf("items of release %d: %w", releaseID, err)
	}
	defer rows.Close()
	var out []ReleaseItem
	for rows.Next() {
		var it ReleaseItem
		if err := rows.Scan(&it.ItemID, &it.Split, &it.LabelKey, &it.Confidence, &it.Votes, &it.GroupKey); err != nil {
			return nil, fmt.Errorf("items of release %d: %w", releaseID, err)
		}
		out = append(out, it)
	}
	return out, rows.Err()
}

// ReleasedItem is a release's recorded row with what its manifest line
// takes from the item itself: the image's SHA-256 and media type (which
// gives the file's extension). Items are content-addressed and never
// change, so these are as they were when the release was cut.
type ReleasedItem struct {
	ReleaseItem
	SHA256    [32]byte
	MediaType string
}

// ReleasedItems returns a release's recorded rows by item id, each joined
// to its item. A row whose item is gone (which the items_keep_released
// trigger forbids) is an error, not a silently shorter release.
func (s *Store) ReleasedItems(ctx context.Context, releaseID int64) ([]ReleasedItem, error) {
	var n int
	if err := s.pool.QueryRow(ctx, `SELECT item_count FROM releases WHERE id = $1`, releaseID).Scan(&n); err != nil {
		return nil, fmt.Errorf("items of release %d: %w", releaseID, mapErr(err))
	}
	rows, err := s.pool.Query(ctx, `
		SELECT ri.item_id, ri.split, ri.label_key, ri.confidence, ri.votes, ri.group_key, i.sha256, coalesce(i.media_type, '')
		FROM release_items ri LEFT JOIN items i ON i.id = ri.item_id
		WHERE ri.release_id = $1
		ORDER BY ri.item_id`, releaseID)
	if err != nil {
		return nil, fmt.Errorf("items of release %d: %w", releaseID, err)
	}
	defer rows.Close()
	out := make([]ReleasedItem, 0, n)
	var sha []byte
	for rows.Next() {
		out = append(out, ReleasedItem{})
		it := &out[len(out)-1]
		if err := rows.Scan(&it.ItemID, &it.Split, &it.LabelKey, &it.Confidence, &it.Votes, &it.GroupKey, &sha, &it.MediaType); err != nil {
			return nil, fmt.Errorf("items of release %d: %w", releaseID, err)
		}
		if len(sha) != 32 {
			return nil, fmt.Errorf("items of release %d: item %d is no longer stored", releaseID, it.ItemID)
		}
		it.SHA256 = [32]byte(sha)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("items of release %d: %w", releaseID, err)
	}
	return out, nil
}

// PriorSplits returns, for every item in an earlier release of the
// project, the split it must keep: test if any earlier release had it in
// test, else validation if any had, else train. Releases cut with another
// seed or split ratio count too, so a new seed or ratio moves only items
// never released before, and an item once in test never comes back in
// validation or train.
//
// Each release is read through the primary key's release_id prefix: a
// single DISTINCT ON query sorted every earlier release's items by item
// id, which took seconds for a million-item project.
func (s *Store) PriorSplits(ctx context.Context, projectID int64) (map[int64]string, error) {
	var ids []int64
	var most int
	rows, err := s.pool.Query(ctx, `SELECT id, item_count FROM releases WHERE project_id = $1 ORDER BY id`, projectID)
	if err != nil {
		return nil, fmt.Errorf("earlier splits of project %d: %w", projectID, err)
	}
	for rows.Next() {
		var id int64
		var n int
		if err := rows.Scan(&id, &n); err != nil {
			rows.Close()
			return nil, fmt.Errorf("earlier splits of project %d: %w", projectID, err)
		}
		ids = append(ids, id)
		most = max(most, n)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("earlier splits of project %d: %w", projectID, err)
	}
	out := make(map[int64]string, most)
	for _, id := range ids {
		if err := s.readSplits(ctx, id, out); err != nil {
			return nil, fmt.Errorf("earlier splits of project %d: %w", projectID, err)
		}
	}
	return out, nil
}

// splitRank orders the splits an item may have had: one of higher rank
// wins, so test is never given up.
var splitRank = map[string]int{"train": 1, "validation": 2, "test": 3}

// readSplits merges the splits of a release's items into out, keeping the
// higher-ranked split where out has one already. The split names are the
// constants, not fresh strings, so a million items cost no allocations
// beyond the map.
func (s *Store) readSplits(ctx context.Context, releaseID int64, out map[int64]string) error {
	rows, err := s.pool.Query(ctx, `SELECT item_id, split FROM release_items WHERE release_id = $1`, releaseID)
	if err != nil {
		return err
	}
	defer rows.Close()
	var id int64
	var raw []byte
	for rows.Next() {
		if err := rows.Scan(&id, &raw); err != nil {
			return err
		}
		var name string
		switch string(raw) {
		case "train":
			name = "train"
		case "validation":
			name = "validation"
		case "test":
			name = "test"
		default:
			return fmt.Errorf("release %d, item %d: unknown split %q", releaseID, id, raw)
		}
		if had, seen := out[id]; !seen || splitRank[name] > splitRank[had] {
			out[id] = name
		}
	}
	return rows.Err()
}

// AgreementSummary returns the engine's last project summary, or nil when
// the engine has not run.
func (s *Store) AgreementSummary(ctx context.Context, projectID int64) (json.RawMessage, error) {
	var raw []byte
	err := s.pool.QueryRow(ctx, `SELECT summary FROM project_stats WHERE project_id = $1`, projectID).Scan(&raw)
	if err == pgx.ErrNoRows {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("agreement summary of project %d: %w", projectID, err)
	}
	return raw, nil
}

// VoteTotals counts a project's votes (with "can't tell", which are paid)
// and the seconds labellers spent on them, for a release's cost.
func (s *Store) VoteTotals(ctx context.Context, projectID int64) (votes int64, seconds float64, err error) {
	err = s.pool.QueryRow(ctx, `SELECT count(*), coalesce(sum(seconds), 0) FROM votes WHERE project_id = $1`, projectID).Scan(&votes, &seconds)
	if err != nil {
		return 0, 0, fmt.Errorf("vote totals of project %d: %w", projectID, err)
	}
	return votes, seconds, nil
}
