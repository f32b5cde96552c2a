package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// VotePolicy says how many votes an item gets and when it is done.
type VotePolicy struct {
	MinVotes         int
	MaxVotes         int
	ConfidenceTarget float64
	GoldRate         float64
	ClaimSeconds     int
	AccuracyFloor    float64
	GoldFeedback     bool
}

// The ranges a lead may set, shared by the command line and the setup
// page so a project made on one can be saved unchanged on the other. The
// projects table's checks are wider (a confidence target strictly
// between 0 and 1, any rate that is not negative); these are the sensible
// part of them.
const (
	MinConfidenceTarget = 0.5   // below this a consensus could lose to another label
	MaxConfidenceTarget = 0.999 // above this hardly any item is ever done
	MaxPayRate          = 1e6
)

// PayModel says how labellers are paid.
type PayModel struct {
	Model        string // per_vote or per_hour
	Rate         float64
	Currency     string
	BudgetCap    *float64
	MinHourlyPay *float64
}

// Pay models.
const (
	PayPerVote = "per_vote"
	PayPerHour = "per_hour"
)

// Project is one labelling job.
type Project struct {
	ID          int64
	Slug        string
	Name        string
	Description string
	Policy      VotePolicy
	Pay         PayModel
	ReleaseSeed int64
	CreatedAt   time.Time
}

// DefaultPolicy is the vote policy of a new project.
func DefaultPolicy() VotePolicy {
	return VotePolicy{MinVotes: 3, MaxVotes: 7, ConfidenceTarget: 0.95, GoldRate: 0.05, ClaimSeconds: 300, AccuracyFloor: 0.6}
}

// DefaultPay is the pay model of a new project.
func DefaultPay() PayModel { return PayModel{Model: PayPerVote, Rate: 0.02, Currency: "EUR"} }

const projectColumns = `id, slug, name, description, min_votes, max_votes, confidence_target, gold_rate,
	claim_seconds, accuracy_floor, gold_feedback, pay_model, pay_rate::float8, currency, budget_cap::float8,
	min_hourly_pay::float8, release_seed, created_at`

func scanProject(row interface{ Scan(...any) error }) (Project, error) {
	var p Project
	err := row.Scan(&p.ID, &p.Slug, &p.Name, &p.Description, &p.Policy.MinVotes, &p.Policy.MaxVotes,
		&p.Policy.ConfidenceTarget, &p.Policy.GoldRate, &p.Policy.ClaimSeconds, &p.Policy.AccuracyFloor,
		&p.Policy.GoldFeedback, &p.Pay.Model, &p.Pay.Rate, &p.Pay.Currency, &p.Pay.BudgetCap,
		&p.Pay.MinHourlyPay, &p.ReleaseSeed, &p.CreatedAt)
	return p, err
}

// CreateProject adds a project; zero policy or pay fields take the defaults.
func (s *Store) CreateProject(ctx context.Context, p Project) (Project, error) {
	out, err := createProject(ctx, s.pool, p)
	if err != nil {
		return Project{}, fmt.Errorf("create project %q: %w", p.Slug, mapErr(err))
	}
	return out, nil
}

func createProject(ctx context.Context, q querier, p Project) (Project, error) {
	if p.Policy == (VotePolicy{}) {
		p.Policy = DefaultPolicy()
	}
	if p.Pay.Model == "" {
		p.Pay = DefaultPay()
	}
	if p.ReleaseSeed == 0 {
		p.ReleaseSeed = 1
	}
	return scanProject(q.QueryRow(ctx, `
		INSERT INTO projects (slug, name, description, min_votes, max_votes, confidence_target, gold_rate,
			claim_seconds, accuracy_floor, gold_feedback, pay_model, pay_rate, currency, budget_cap,
			min_hourly_pay, release_seed)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16)
		RETURNING `+projectColumns,
		p.Slug, p.Name, p.Description, p.Policy.MinVotes, p.Policy.MaxVotes, p.Policy.ConfidenceTarget,
		p.Policy.GoldRate, p.Policy.ClaimSeconds, p.Policy.AccuracyFloor, p.Policy.GoldFeedback,
		p.Pay.Model, p.Pay.Rate, p.Pay.Currency, p.Pay.BudgetCap, p.Pay.MinHourlyPay, p.ReleaseSeed))
}

// UpdateProject saves name, description, vote policy and pay model.
func (s *Store) UpdateProject(ctx context.Context, p Project) (Project, error) {
	row := s.pool.QueryRow(ctx, `
		UPDATE projects SET name = $2, description = $3, min_votes = $4, max_votes = $5,
			confidence_target = $6, gold_rate = $7, claim_seconds = $8, accuracy_floor = $9,
			gold_feedback = $10, pay_model = $11, pay_rate = $12, currency = $13, budget_cap = $14,
			min_hourly_pay = $15
		WHERE id = $1
		RETURNING `+projectColumns,
		p.ID, p.Name, p.Description, p.Policy.MinVotes, p.Policy.MaxVotes, p.Policy.ConfidenceTarget,
		p.Policy.GoldRate, p.Policy.ClaimSeconds, p.Policy.AccuracyFloor, p.Policy.GoldFeedback,
		p.Pay.Model, p.Pay.Rate, p.Pay.Currency, p.Pay.BudgetCap, p.Pay.MinHourlyPay)
	out, err := scanProject(row)
	if err != nil {
		return Project{}, fmt.Errorf("update project %d: %w", p.ID, mapErr(err))
	}
	return out, nil
}

// ProjectByID returns one project.
func (s *Store) ProjectByID(ctx context.Context, id int64) (Project, error) {
	p, err := scanProject(s.pool.QueryRow(ctx, `SELECT `+projectColumns+` FROM projects WHERE id = $1`, id))
	if err != nil {
		return Project{}, fmt.Errorf("project %d: %w", id, mapErr(err))
	}
	return p, nil
}

// ProjectBySlug returns the project with this slug.
func (s *Store) ProjectBySlug(ctx context.Context, slug string) (Project, error) {
	p, err := scanProject(s.pool.QueryRow(ctx, `SELECT `+projectColumns+` FROM projects WHERE slug = $1`, slug))
	if err != nil {
		return Project{}, fmt.Errorf("project %q: %w", slug, mapErr(err))
	}
	return p, nil
}

// ListProjects returns every project by slug.
func (s *Store) ListProjects(ctx context.Context) ([]Project, error) {
	return s.queryProjects(ctx, `SELECT `+projectColumns+` FROM projects ORDER BY slug`)
}

// ProjectsOfMember returns the projects a user is a member of (any status).
func (s *Store) ProjectsOfMember(ctx context.Context, userID int64) ([]Project, error) {
	return s.queryProjects(ctx, `SELECT `+projectColumns+` FROM projects
		WHERE id IN (SELECT project_id FROM project_members WHERE user_id = $1) ORDER BY slug`, userID)
}

func (s *Store) queryProjects(ctx context.Context, sql string, args ...any) ([]Project, error) {
	rows, err := s.pool.Query(ctx, sql, args...)
	if err != nil {
		return nil, fmt.Errorf("list projects: %w", err)
	}
	defer rows.Close()
	var out []Project
	for rows.Next() {
		p, err := scanProject(rows)
		if err != nil {
			return nil, fmt.Errorf("list projects: %w", err)
		}
		out = append(out, p)
	}
	return out, rows.Err()
}

// CreateProjectWithTaxonomy creates a project and its taxonomy in one
// transaction, so a bad taxonomy leaves no project behind.
func (s *Store) CreateProjectWithTaxonomy(ctx context.Context, p Project, labels []LabelInput) (Project, error) {
	var out Project
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		if out, err = createProject(ctx, tx, p); err != nil {
			return err
		}
		if len(labels) > 0 {
			return replaceTaxonomy(ctx, tx, out.ID, labels)
		}
		return nil
	})
	if err != nil {
		return Project{}, fmt.Errorf("create project %q: %w", p.Slug, mapErr(err))
	}
	return out, nil
}
