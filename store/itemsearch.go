package store

import (
	"context"
	"fmt"
)

// ItemFilter narrows the lead's item list. Nil fields do not filter.
type ItemFilter struct {
	Status        *string
	LabelID       *int64   // consensus label
	MinConfidence *float64 // consensus confidence, inclusive
	MaxConfidence *float64
	// Disputed keeps items whose consensus is tied or below the project's
	// confidence target.
	Disputed bool
	GoldOnly bool // items with a known answer (gold or lead)
}

// ItemCursor is where a page of the item list starts. Items in review come
// first (the lead decides those), then the rest by id; a cursor names the
// phase and the last id seen.
type ItemCursor struct {
	Rest    bool  // past the review items
	AfterID int64 // last id shown in the current phase
}

// ItemRow is one line of the item list.
type ItemRow struct {
	ID           int64
	OriginalName string
	Status       string
	VoteCount    int
	VotesNeeded  int
	LabelKey     string // consensus label; "" when none
	LabelName    string
	Confidence   *float64
	Tied         bool
	Method       string
	Gold         bool
	HasThumb     bool
}

// SearchItems returns up to limit items matching f from cursor c, and the
// cursor of the next page (nil on the last page). Each phase walks an index
// in id order ((project_id, status) for review items, (project_id, id) for
// the rest) and stops after limit+1 rows, so a page costs the same however
// many items the project has.
func (s *Store) SearchItems(ctx context.Context, projectID int64, confidenceTarget float64, f ItemFilter, c ItemCursor, limit int) ([]ItemRow, *ItemCursor, error) {
	if limit <= 0 {
		limit = 50
	}
	var out []ItemRow
	wantReview := f.Status == nil || *f.Status == "review"
	if !c.Rest && wantReview {
		rows, err := s.searchPhase(ctx, projectID, confidenceTarget, f, true, c.AfterID, limit+1)
		if err != nil {
			return nil, nil, err
		}
		if len(rows) > limit {
			return rows[:limit], &ItemCursor{AfterID: rows[limit-1].ID}, nil
		}
		out = rows
		c = ItemCursor{Rest: true}
	}
	if f.Status != nil && *f.Status == "review" {
		return out, nil, nil
	}
	rest := limit - len(out)
	rows, err := s.searchPhase(ctx, projectID, confidenceTarget, f, false, c.AfterID, rest+1)
	if err != nil {
		return nil, nil, err
	}
	if len(rows) > rest {
		out = append(out, rows[:rest]...)
		var after int64
		if rest > 0 {
			after = rows[rest-1].ID
		}
		return out, &ItemCursor{Rest: true, AfterID: after}, nil
	}
	return append(out, rows...), nil, nil
}

func (s *Store) searchPhase(ctx context.Context, projectID int64, target float64, f ItemFilter, review bool, after int64, limit int) ([]ItemRow, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT i.id, i.original_name, i.status, i.vote_count, i.votes_needed, coalesce(t.key, ''), coalesce(t.name, ''),
			c.confidence, coalesce(c.tied, false), coalesce(c.method, ''),
			EXISTS (SELECT 1 FROM gold_answers g WHERE g.item_id = i.id), i.thumb_key IS NOT NULL
		FROM items i
		LEFT JOIN consensus c ON c.item_id = i.id
		LEFT JOIN taxonomy_nodes t ON t.id = c.label_id
		WHERE i.project_id = $1 AND i.id > $2
			AND (CASE WHEN $3 THEN i.status = 'review' ELSE i.status <> 'review' END)
			AND ($4::text IS NULL OR i.status = $4)
			AND ($5::bigint IS NULL OR c.label_id = $5)
			AND ($6::float8 IS NULL OR c.confidence >= $6)
			AND ($7::float8 IS NULL OR c.confidence <= $7)
			AND (NOT $8 OR c.tied OR c.confidence < $9)
			AND (NOT $10 OR EXISTS (SELECT 1 FROM gold_answers g WHERE g.item_id = i.id))
		ORDER BY i.id LIMIT $11`,
		projectID, after, review, f.Status, f.LabelID, f.MinConfidence, f.MaxConfidence, f.Disputed, target, f.GoldOnly, limit)
	if err != nil {
		return nil, fmt.Errorf("search items of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []ItemRow
	for rows.Next() {
		var r ItemRow
		if err := rows.Scan(&r.ID, &r.OriginalName, &r.Status, &r.VoteCount, &r.VotesNeeded, &r.LabelKey, &r.LabelName,
			&r.Confidence, &r.Tied, &r.Method, &r.Gold, &r.HasThumb); err != nil {
			return nil, fmt.Errorf("search items of project %d: %w", projectID, err)
		}
		out = append(out, r)
	}
	return out, rows.Err()
}
