package store

import (
	"context"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
)

// ItemStatusOrder lists the item statuses in the order the lead pages show them.
var ItemStatusOrder = []string{"unstarted", "needs_votes", "done", "review"}

// StatusCounts is how many items a project has in each status, and how many
// more votes its open items need.
type StatusCounts struct {
	ByStatus    map[string]int
	Total       int
	VotesNeeded int64 // sum of votes_needed over unstarted and needs-votes items
}

// ProjectStatusCounts counts a project's items by status. It never reads
// the votes: the counts come from the (project_id, status) index alone,
// and the votes needed from the open items only; one statement, so both
// are of one moment.
func (s *Store) ProjectStatusCounts(ctx context.Context, projectID int64) (StatusCounts, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT status, count(*), 0::bigint FROM items WHERE project_id = $1 GROUP BY status
		UNION ALL
		SELECT '', 0, coalesce(sum(votes_needed), 0) FROM items
		WHERE project_id = $1 AND status IN ('unstarted', 'needs_votes')`, projectID)
	if err != nil {
		return StatusCounts{}, fmt.Errorf("status counts of project %d: %w", projectID, err)
	}
	defer rows.Close()
	out := StatusCounts{ByStatus: map[string]int{}}
	for rows.Next() {
		var st string
		var n int
		var need int64
		if err := rows.Scan(&st, &n, &need); err != nil {
			return StatusCounts{}, fmt.Errorf("status counts of project %d: %w", projectID, err)
		}
		if st != "" {
			out.ByStatus[st] = n
			out.Total += n
		}
		out.VotesNeeded += need
	}
	return out, rows.Err()
}

// ProjectOverview is one row of the lead's project list.
type ProjectOverview struct {
	Project
	Items  int
	Done   int
	Labels int
}

// ProjectOverviews lists every project with its item and label counts.
func (s *Store) ProjectOverviews(ctx context.Context) ([]ProjectOverview, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT `+prefixed("p", projectColumns)+`,
			coalesce(i.n, 0), coalesce(i.done, 0),
			(SELECT count(*) FROM taxonomy_nodes t WHERE t.project_id = p.id AND t.is_leaf)
		FROM projects p
		LEFT JOIN (SELECT project_id, count(*) AS n, count(*) FILTER (WHERE status = 'done') AS done
			FROM items GROUP BY project_id) i ON i.project_id = p.id
		ORDER BY p.slug`)
	if err != nil {
		return nil, fmt.Errorf("project overviews: %w", err)
	}
	defer rows.Close()
	var out []ProjectOverview
	for rows.Next() {
		var o ProjectOverview
		p := &o.Project
		err := rows.Scan(&p.ID, &p.Slug, &p.Name, &p.Description, &p.Policy.MinVotes, &p.Policy.MaxVotes,
			&p.Policy.ConfidenceTarget, &p.Policy.GoldRate, &p.Policy.ClaimSeconds, &p.Policy.AccuracyFloor,
			&p.Policy.GoldFeedback, &p.Pay.Model, &p.Pay.Rate, &p.Pay.Currency, &p.Pay.BudgetCap,
			&p.Pay.MinHourlyPay, &p.ReleaseSeed, &p.CreatedAt, &o.Items, &o.Done, &o.Labels)
		if err != nil {
			return nil, fmt.Errorf("project overviews: %w", err)
		}
		out = append(out, o)
	}
	return out, rows.Err()
}

// HourCount is the number of votes cast in one hour.
type HourCount struct {
	Hour  time.Time // start of the hour, UTC
	Votes int
}

// VotesPerHour counts the votes of each UTC hour from the one containing
// since (hours without votes are left out). It reads the hours the last
// refit counted (project_vote_hours) and counts only the votes outside
// them, each a range of the (project_id, created_at) index: those since the
// count and, when since is further back than the count keeps, those
// before its first hour.
func (s *Store) VotesPerHour(ctx context.Context, projectID int64, since time.Time) ([]HourCount, error) {
	since = since.UTC().Truncate(time.Hour)
	var out []HourCount
	err := s.readCounted(ctx, projectID, func(tx pgx.Tx, until, kept time.Time) error {
		rows, err := tx.Query(ctx, `
			SELECT hour, sum(n) FROM (
				SELECT hour, votes::bigint AS n FROM project_vote_hours WHERE project_id = $1 AND hour >= $2
				UNION ALL
				SELECT date_trunc('hour', created_at, 'UTC'), count(*) FROM votes
				WHERE project_id = $1 AND created_at >= greatest($2, $3)
				GROUP BY 1
				UNION ALL
				SELECT date_trunc('hour', created_at, 'UTC'), count(*) FROM votes
				WHERE project_id = $1 AND created_at >= $2 AND created_at < $4
				GROUP BY 1
			) x GROUP BY hour ORDER BY hour`, projectID, since, until, kept)
		if err != nil {
			return err
		}
		var h HourCount
		_, err = pgx.ForEachRow(rows, []any{&h.Hour, &h.Votes}, func() error {
			out = append(out, HourCount{Hour: h.Hour.UTC(), Votes: h.Votes})
			return nil
		})
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("votes per hour of project %d: %w", projectID, err)
	}
	return out, nil
}

// ActiveLabellers counts the labellers who voted in the project since each
// of the two times (say, one hour ago and the start of today): those the
// last refit saw vote since then (labeller_stats.last_vote_at) and those
// with votes created after that count.
func (s *Store) ActiveLabellers(ctx context.Context, projectID int64, recent, earlier time.Time) (sinceRecent, sinceEarlier int, err error) {
	if recent.Before(earlier) {
		recent, earlier = earlier, recent
	}
	err = s.readCounted(ctx, projectID, func(tx pgx.Tx, until, _ time.Time) error {
		return tx.QueryRow(ctx, `
			SELECT count(*) FILTER (WHERE last >= $2), count(*) FROM (
				SELECT labeller_id, max(at) AS last FROM (
					SELECT user_id AS labeller_id, last_vote_at AS at FROM labeller_stats
					WHERE project_id = $1 AND last_vote_at >= $3
					UNION ALL
					SELECT labeller_id, created_at FROM votes
					WHERE project_id = $1 AND created_at >= greatest($3, $4)
				) x GROUP BY labeller_id
			) y`, projectID, recent, earlier, until).Scan(&sinceRecent, &sinceEarlier)
	})
	if err != nil {
		return 0, 0, fmt.Errorf("active labellers of project %d: %w", projectID, err)
	}
	return sinceRecent, sinceEarlier, nil
}

// LabellerRow is one labeller of a project as the lead sees them: the
// membership joined with the engine's last figures (nil before any fit).
type LabellerRow struct {
	User         User
	Member       bool   // false for someone with votes who has since left
	Status       string // membership status; "" when not a member
	StatusReason string
	LabellerFigures
	StatsAt *time.Time // nil before any fit
}

var labellerRowSelect = `
	SELECT ` + userCols + `, m.user_id IS NOT NULL, coalesce(m.status, ''), coalesce(m.status_reason, ''),
		coalesce(ls.votes, 0), ls.median_seconds, ls.accuracy, coalesce(ls.gold_correct, 0),
		coalesce(ls.gold_total, 0), ls.gold_low, ls.gold_high, ls.agreement, coalesce(ls.flags, '{}'), ls.updated_at
	FROM users u
	LEFT JOIN project_members m ON m.project_id = $1 AND m.user_id = u.id
	LEFT JOIN labeller_stats ls ON ls.project_id = $1 AND ls.user_id = u.id`

var userCols = prefixed("u", userColumns)

func scanLabellerRow(row pgx.Row) (LabellerRow, error) {
	var r LabellerRow
	err := row.Scan(append(r.User.dest(),
		&r.Member, &r.Status, &r.StatusReason, &r.Votes, &r.MedianSeconds, &r.Accuracy, &r.GoldCorrect,
		&r.GoldTotal, &r.GoldLow, &r.GoldHigh, &r.Agreement, &r.Flags, &r.StatsAt)...)
	return r, err
}

// LabellerRows lists the project's members and everyone with engine figures
// in it, most votes first.
func (s *Store) LabellerRows(ctx context.Context, projectID int64) ([]LabellerRow, error) {
	rows, err := s.pool.Query(ctx, labellerRowSelect+`
		WHERE u.id IN (SELECT user_id FROM project_members WHERE project_id = $1
			UNION SELECT user_id FROM labeller_stats WHERE project_id = $1)
		ORDER BY coalesce(ls.votes, 0) DESC, u.login`, projectID)
	if err != nil {
		return nil, fmt.Errorf("labellers of project %d: %w", projectID, err)
	}
	defer rows.Close()
	var out []LabellerRow
	for rows.Next() {
		r, err := scanLabellerRow(rows)
		if err != nil {
			return nil, fmt.Errorf("labellers of project %d: %w", projectID, err)
		}
		out = append(out, r)
	}
	return out, rows.Err()
}

// LabellerRowOf returns one labeller of a project; ErrNotFound when they
// are neither a member nor have figures in it.
func (s *Store) LabellerRowOf(ctx context.Context, projectID, userID int64) (LabellerRow, error) {
	r, err := scanLabellerRow(s.pool.QueryRow(ctx, labellerRowSelect+`
		WHERE u.id = $2 AND (m.user_id IS NOT NULL OR ls.user_id IS NOT NULL)`, projectID, userID))
	if err != nil {
		return LabellerRow{}, fmt.Errorf("labeller %d of project %d: %w", userID, projectID, mapErr(err))
	}
	return r, nil
}

// LabellerConfusion returns the labeller's fitted confusion matrix from
// the last fit; ErrNotFound when there is none yet.
func (s *Store) LabellerConfusion(ctx context.Context, projectID, userID int64) (LabellerModel, error) {
	var b []byte
	err := s.pool.QueryRow(ctx, `SELECT confusion FROM labeller_stats WHERE project_id = $1 AND user_id = $2 AND confusion IS NOT NULL`,
		projectID, userID).Scan(&b)
	if err != nil {
		return LabellerModel{}, fmt.Errorf("confusion of labeller %d in project %d: %w", userID, projectID, mapErr(err))
	}
	var m LabellerModel
	if err := json.Unmarshal(b, &m); err != nil {
		return LabellerModel{}, fmt.Errorf("decode confusion of labeller %d in project %d: %w", userID, projectID, err)
	}
	return m, nil
}

// VoteView is one vote with what the lead pages print beside it.
type VoteView struct {
	ID        string
	ItemID    int64
	Labeller  User
	LabelID   *int64 // nil: "can't tell"
	LabelKey  string
	LabelName string
	Seconds   float64
	CreatedAt time.Time
	// Reliability of the labeller from the last fit (nil before one).
	Accuracy  *float64
	Agreement *float64
	// ConsensusKey is the item's consensus label key ("" when none).
	ConsensusKey string
}

var voteViewSelect = `
	SELECT v.id::text, v.item_id, ` + userCols + `, v.label_id, coalesce(t.key, ''), coalesce(t.name, ''), v.seconds,
		v.created_at, ls.accuracy, ls.agreement, coalesce(ct.key, '')
	FROM votes v JOIN users u ON u.id = v.labeller_id
	LEFT JOIN taxonomy_nodes t ON t.id = v.label_id
	LEFT JOIN labeller_stats ls ON ls.project_id = v.project_id AND ls.user_id = v.labeller_id
	LEFT JOIN consensus c ON c.item_id = v.item_id
	LEFT JOIN taxonomy_nodes ct ON ct.id = c.label_id`

// RecentVotes returns a labeller's latest votes in a project, newest first.
func (s *Store) RecentVotes(ctx context.Context, projectID, userID int64, limit int) ([]VoteView, error) {
	return s.queryVotes(ctx, voteViewSelect+`
		WHERE v.labeller_id = $2 AND v.project_id = $1
		ORDER BY v.created_at DESC LIMIT $3`, projectID, userID, limit)
}

// VotesOnItem returns every vote on an item, oldest first.
func (s *Store) VotesOnItem(ctx context.Context, projectID, itemID int64) ([]VoteView, error) {
	return s.queryVotes(ctx, voteViewSelect+`
		WHERE v.item_id = $2 AND v.project_id = $1
		ORDER BY v.created_at, v.id LIMIT $3`, projectID, itemID, 10000)
}

func (s *Store) queryVotes(ctx context.Context, sql string, args ...any) ([]VoteView, error) {
	rows, err := s.pool.Query(ctx, sql, args...)
	if err != nil {
		return nil, fmt.Errorf("votes: %w", err)
	}
	defer rows.Close()
	var out []VoteView
	for rows.Next() {
		var v VoteView
		dest := append(append([]any{&v.ID, &v.ItemID}, v.Labeller.dest()...), &v.LabelID, &v.LabelKey, &v.LabelName,
			&v.Seconds, &v.CreatedAt, &v.Accuracy, &v.Agreement, &v.ConsensusKey)
		if err := rows.Scan(dest...); err != nil {
			return nil, fmt.Errorf("votes: %w", err)
		}
		out = append(out, v)
	}
	return out, rows.Err()
}

// ConsensusView is an item's consensus as the engine (or a lead) set it.
type ConsensusView struct {
	ConsensusRow
	UpdatedAt time.Time
}

// ConsensusOf returns an item's consensus; ErrNotFound before it has one.
func (s *Store) ConsensusOf(ctx context.Context, projectID, itemID int64) (ConsensusView, error) {
	c := ConsensusView{ConsensusRow: ConsensusRow{ItemID: itemID}}
	err := s.pool.QueryRow(ctx, `
		SELECT label_id, confidence, method, vote_count, tied, rollup_label_id, rollup_confidence,
			posterior_labels, posterior, updated_at
		FROM consensus WHERE project_id = $1 AND item_id = $2`, projectID, itemID).
		Scan(&c.LabelID, &c.Confidence, &c.Method, &c.VoteCount, &c.Tied, &c.RollupLabelID, &c.RollupConfidence,
			&c.PosteriorLabels, &c.Posterior, &c.UpdatedAt)
	if err != nil {
		return ConsensusView{}, fmt.Errorf("consensus of item %d: %w", itemID, mapErr(err))
	}
	return c, nil
}

// KnownAnswer is an item's gold answer or lead decision.
type KnownAnswer struct {
	ItemID    int64
	LabelID   int64
	Source    string // gold or lead
	DecidedBy *int64
}

// GoldAnswerOf returns the item's known answer; ErrNotFound when it has none.
func (s *Store) GoldAnswerOf(ctx context.Context, projectID, itemID int64) (KnownAnswer, error) {
	var g KnownAnswer
	err := s.pool.QueryRow(ctx, `
		SELECT item_id, label_id, source, decided_by FROM gold_answers
		WHERE project_id = $1 AND item_id = $2`, projectID, itemID).
		Scan(&g.ItemID, &g.LabelID, &g.Source, &g.DecidedBy)
	if err != nil {
		return KnownAnswer{}, fmt.Errorf("gold answer of item %d: %w", itemID, mapErr(err))
	}
	return g, nil
}

// SetLeadLabel records a lead's decision on an item: it becomes a known
// answer (source lead, which the engine holds fixed like gold), the
// consensus, and the item is done. Only a leaf can be a final label.
func (s *Store) SetLeadLabel(ctx context.Context, projectID, itemID, labelID, leadID int64) error {
	var leaf bool
	err := s.pool.QueryRow(ctx, `SELECT is_leaf FROM taxonomy_nodes WHERE project_id = $1 AND id = $2`, projectID, labelID).Scan(&leaf)
	if err != nil {
		return fmt.Errorf("lead label for item %d: label %d: %w", itemID, labelID, mapErr(err))
	}
	if !leaf {
		return fmt.Errorf("lead label for item %d: %w", itemID, &ConflictError{Constraint: "label", Detail: "a final label must be a leaf of the taxonomy"})
	}
	if _, err := s.Item(ctx, projectID, itemID); err != nil {
		return err
	}
	return s.SetGoldAnswer(ctx, projectID, itemID, labelID, GoldSourceLead, &leadID)
}

// GoldInput is one known answer to import: Item names the item by id, by
// original file name, or by a prefix (8 or more hex digits) of its SHA-256;
// Label is a leaf key of the taxonomy.
type GoldInput struct {
	Item  string
	Label string
}

// GoldRowError says which input row of AddGoldAnswers is wrong and why.
type GoldRowError struct {
	Index int    // 0-based index into the inputs
	Field string // "item" or "label"
	Msg   string
}

func (e *GoldRowError) Error() string {
	return "row " + strconv.Itoa(e.Index+1) + ", " + e.Field + ": " + e.Msg
}

// AddGoldAnswers stores known answers in one transaction: either every row
// resolves and is stored, or nothing is and the first bad row is reported
// as a *GoldRowError. An item that has an answer gets the new one. As with
// SetGoldAnswer, each item becomes done with that label as its consensus.
func (s *Store) AddGoldAnswers(ctx context.Context, projectID, userID int64, rows []GoldInput) (int, error) {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		leaves := map[string]int64{}
		inner := map[string]bool{}
		lrows, err := tx.Query(ctx, `SELECT key, id, is_leaf FROM taxonomy_nodes WHERE project_id = $1`, projectID)
		if err != nil {
			return err
		}
		for lrows.Next() {
			var key string
			var id int64
			var leaf bool
			if err := lrows.Scan(&key, &id, &leaf); err != nil {
				return err
			}
			if leaf {
				leaves[key] = id
			} else {
				inner[key] = true
			}
		}
		if err := lrows.Err(); err != nil {
			return err
		}
		items, labels := make([]int64, len(rows)), make([]int64, len(rows))
		for i, r := range rows {
			id, ok := leaves[r.Label]
			switch {
			case ok:
			case inner[r.Label]:
				return &GoldRowError{i, "label", fmt.Sprintf("%q is not a leaf; a gold answer names the most specific label", r.Label)}
			default:
				return &GoldRowError{i, "label", fmt.Sprintf("%q is not a label key of this project's taxonomy", r.Label)}
			}
			labels[i] = id
			if items[i], err = resolveItem(ctx, tx, projectID, r.Item); err != nil {
				var re *GoldRowError
				if errors.As(err, &re) {
					re.Index = i
				}
				return err
			}
		}
		_, err = tx.Exec(ctx, `
			WITH u AS (
				SELECT DISTINCT ON (it) it, lb FROM unnest($3::bigint[], $4::bigint[]) WITH ORDINALITY AS u(it, lb, ord)
				ORDER BY it, ord DESC
			), g AS (
				INSERT INTO gold_answers (item_id, project_id, label_id, source, decided_by)
				SELECT it, $1, lb, 'gold', $2 FROM u
				ON CONFLICT (item_id) DO UPDATE SET label_id = excluded.label_id, source = 'gold',
					decided_by = excluded.decided_by, created_at = now()
			), c AS (
				INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count,
					posterior_labels, posterior)
				SELECT u.it, $1, u.lb, 1, 'gold', i.vote_count, ARRAY[u.lb], ARRAY[1::float8]
				FROM u JOIN items i ON i.id = u.it
				ON CONFLICT (item_id) DO UPDATE SET label_id = excluded.label_id, confidence = 1,
					method = 'gold', tied = false, rollup_label_id = NULL, rollup_confidence = NULL,
					posterior_labels = excluded.posterior_labels, posterior = excluded.posterior, updated_at = now()
			)
			UPDATE items SET status = 'done', votes_needed = 0, priority = 0 WHERE id IN (SELECT it FROM u)`,
			projectID, userID, items, labels)
		return err
	})
	if err != nil {
		var re *GoldRowError
		if errors.As(err, &re) {
			return 0, err
		}
		return 0, fmt.Errorf("add gold answers to project %d: %w", projectID, mapErr(err))
	}
	return len(rows), nil
}

// resolveItem finds the one item ref names: all digits is an id; otherwise
// an original file name, and failing that a SHA-256 prefix.
func resolveItem(ctx context.Context, q querier, projectID int64, ref string) (int64, error) {
	bad := func(msg string) error { return &GoldRowError{Field: "item", Msg: msg} }
	if ref == "" {
		return 0, bad("empty")
	}
	if id, err := strconv.ParseInt(ref, 10, 64); err == nil {
		var got int64
		err := q.QueryRow(ctx, `SELECT id FROM items WHERE project_id = $1 AND id = $2`, projectID, id).Scan(&got)
		if errors.Is(err, pgx.ErrNoRows) {
			return 0, bad(fmt.Sprintf("no item with id %d in this project", id))
		}
		return got, err
	}
	ids, err := collectIDs(ctx, q, `SELECT id FROM items WHERE project_id = $1 AND original_name = $2 LIMIT 2`, projectID, ref)
	if err != nil {
		return 0, err
	}
	if len(ids) == 0 && len(ref) >= 8 && len(ref) <= 64 && isHex(ref) {
		lo, hi := hexPrefixRange(strings.ToLower(ref))
		ids, err = collectIDs(ctx, q, `SELECT id FROM items
			WHERE project_id = $1 AND sha256 >= $2 AND ($3::bytea IS NULL OR sha256 < $3) LIMIT 2`, projectID, lo, hi)
		if err != nil {
			return 0, err
		}
	}
	switch len(ids) {
	case 1:
		return ids[0], nil
	case 0:
		return 0, bad(fmt.Sprintf("%q matches no item (not an id, file name or SHA-256 prefix of this project)", ref))
	default:
		return 0, bad(fmt.Sprintf("%q matches more than one item; use the item id", ref))
	}
}

func collectIDs(ctx context.Context, q querier, sql string, args ...any) ([]int64, error) {
	rows, err := q.Query(ctx, sql, args...)
	if err != nil {
		return nil, err
	}
	return pgx.CollectRows(rows, pgx.RowTo[int64])
}

func isHex(s string) bool {
	_, err := hex.DecodeString(s + strings.Repeat("0", len(s)%2))
	return err == nil
}

// hexPrefixRange gives the byte range [lo, hi) of all SHA-256 sums that
// start with the hex prefix p; hi is nil when the prefix is all f (no upper
// bound).
func hexPrefixRange(p string) (lo, hi []byte) {
	lo, _ = hex.DecodeString(p + strings.Repeat("0", 64-len(p)))
	hi = append([]byte(nil), lo...)
	// Add one at the last digit of the prefix, carrying leftwards.
	pos := len(p) - 1
	for pos >= 0 {
		b, shift := pos/2, uint(4*(1-pos%2))
		d := (hi[b] >> shift) & 0xf
		if d < 0xf {
			hi[b] += 1 << shift
			return lo, hi
		}
		hi[b] &^= 0xf << shift
		pos--
	}
	return lo, nil
}
