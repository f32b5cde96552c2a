package main

import (
	"bytes"
	"context"
	_ "embed"
	"errors"
	"fmt"
	"io"
	"runtime"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/blob"
	"github.com/concord-labs/concord/taxonomy"
	"github.com/concord-labs/concord/web"
)

const demoUsage = "demo [--addr HOST:PORT] [--data DIR] [--setup-only] [--reset] [--items N] [--seed S] [--crowd SPEC]"

// demoTaxonomy is a copy of testdata/taxonomy/recycling.txt inside the
// binary, so the demo runs from any folder.
//
//go:embed demodata/recycling.txt
var demoTaxonomy string

const (
	demoSlug = "demo-sorting-line"
	// demoPassword is every demo account's password. It is printed on the
	// screen, so it is only fit for a demo on one's own machine.
	demoPassword = "sorting-line-demo"
	demoLead     = "lead"
	// demoMark ends the display names of accounts the demo made, so a
	// second run knows which accounts are its own.
	demoMark = " (demo)"
)

const demoCaution = `Everything about the people in this demo is simulated: the labellers, their
votes, their seconds per vote and so their hours and pay. A real project must
pay and schedule its labellers as local labour law requires (minimum pay,
working hours, breaks) and should take advice where unsure. The images are
synthetic drawings of waste on a belt; they show no people.`

type demoOptions struct {
	items     int
	seed      uint64
	crowd     string
	setupOnly bool
	reset     bool
}

func runDemo(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "demo", demoUsage)
	var cfg serveConfig
	bindServeFlags(fs, &cfg)
	var o demoOptions
	fs.BoolVar(&o.setupOnly, "setup-only", false, "build the demo project and its votes, then exit without serving")
	fs.BoolVar(&o.reset, "reset", false, "delete the demo project (not its accounts) and build it again")
	fs.IntVar(&o.items, "items", 600, "images to draw")
	fs.Uint64Var(&o.seed, "seed", 1, "seed for the drawings and the simulated crowd")
	fs.StringVar(&o.crowd, "crowd", demoCrowdSpec, "simulated labellers as kind:count,... (careful, average, sloppy, random, biased)")
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	if o.items < 10 || o.items > 20000 {
		return usagef("demo: --items %d: want 10 to 20000", o.items)
	}
	s, closeDB, err := openStore(ctx, e)
	if err != nil {
		return err
	}
	defer closeDB()
	srv := web.New(s, e.logger, cfg.web)
	d, err := setupDemo(ctx, e.stdout, s, srv, cfg.web.DataDir, o)
	if err != nil {
		return err
	}
	if o.setupOnly {
		return nil
	}
	ready := make(chan string, 1)
	go func() {
		select {
		case addr := <-ready:
			fmt.Fprintf(e.stdout, "\nConcord is serving the demo at http://%s/\nLog in as %q (lead) or as a labeller, password %q. Stop with Ctrl-C.\n",
				addr, demoLead, demoPassword)
			if len(d.warnings) > 0 {
				fmt.Fprintln(e.stdout, strings.Join(d.warnings, "\n"))
			}
		case <-ctx.Done():
		}
	}()
	return serve(ctx, e, s, cfg, ready)
}

// demoResult is what the set-up made, for the summary and tests.
type demoResult struct {
	project  store.Project
	warnings []string
}

// setupDemo builds (or finds) the demo project, its images, accounts, gold
// items and votes. Every step skips what is there already, so a second run
// changes nothing and an interrupted run resumes.
func setupDemo(ctx context.Context, out io.Writer, s *store.Store, srv *web.Server, dataDir string, o demoOptions) (demoResult, error) {
	start := time.Now()
	var res demoResult
	tax, err := taxonomy.ParseString(demoTaxonomy)
	if err != nil {
		return res, fmt.Errorf("demo taxonomy (built in): %w", err)
	}
	var leaves []string
	for _, i := range tax.Leaves() {
		leaves = append(leaves, tax.Key(i))
	}
	crowd, err := newDemoCrowd(leaves, o.items, o.seed, o.crowd)
	if err != nil {
		return res, usagef("demo: %v", err)
	}

	p, err := demoProject(ctx, out, s, tax, o.reset)
	if err != nil {
		return res, err
	}
	res.project = p
	frameOf, err := demoImport(ctx, out, s, dataDir, p, crowd)
	if err != nil {
		return res, err
	}
	people, warnings, err := demoAccounts(ctx, s, p, crowd)
	if err != nil {
		return res, err
	}
	res.warnings = warnings
	labels, err := s.Labels(ctx, p.ID)
	if err != nil {
		return res, err
	}
	labelOf := map[string]int64{}
	for _, l := range labels {
		labelOf[l.Key] = l.ID
	}
	gold, err := demoGold(ctx, s, p, crowd, frameOf, labelOf)
	if err != nil {
		return res, err
	}

	counts, err := s.ProjectStatusCounts(ctx, p.ID)
	if err != nil {
		return res, err
	}
	open := counts.ByStatus["unstarted"] + counts.ByStatus["needs_votes"]
	if open > 0 {
		fmt.Fprintf(out, "Simulating %d labellers (%s) voting on %d items...\n", len(people), o.crowd, open)
		run := &crowdRun{store: s, project: p, crowd: crowd, people: people, frameOf: frameOf, labelOf: labelOf,
			decide: srv.VoteDecider(&p),
			refit:  func(ctx context.Context) error { return demoRefit(ctx, srv, p.ID) }, out: out}
		if _, err := run.run(ctx); err != nil {
			return res, err
		}
	} else {
		fmt.Fprintln(out, "The demo's votes are complete already; nothing to simulate.")
	}
	return res, demoSummary(ctx, out, s, p, people, gold, time.Since(start))
}

// demoProject finds the demo project, or creates it with the built-in
// taxonomy. With reset it deletes the old one first.
func demoProject(ctx context.Context, out io.Writer, s *store.Store, tax *taxonomy.Taxonomy, reset bool) (store.Project, error) {
	p, err := s.ProjectBySlug(ctx, demoSlug)
	switch {
	case err == nil && reset:
		if err := s.DeleteProject(ctx, p.ID); err != nil {
			return store.Project{}, err
		}
		fmt.Fprintf(out, "Deleted the old demo project %s.\n", demoSlug)
	case err == nil:
		fmt.Fprintf(out, "Found the demo project %s (id %d); reusing it.\n", demoSlug, p.ID)
		return p, nil
	case !errors.Is(err, store.ErrNotFound):
		return store.Project{}, err
	}
	p = store.Project{
		Slug: demoSlug,
		Name: "Demo: sorting-line camera",
		Description: "Label the main object on each frame from the sorting-line camera by its material. " +
			"This is a demo: " + strings.Join(strings.Fields(demoCaution), " "),
		Policy: store.DefaultPolicy(),
		Pay:    store.PayModel{Model: store.PayPerVote, Rate: 0.03, Currency: "EUR"},
	}
	p, err = s.CreateProjectWithTaxonomy(ctx, p, store.LabelInputsOf(tax))
	if errors.Is(err, store.ErrConflict) {
		// Another demo run created it a moment ago.
		return s.ProjectBySlug(ctx, demoSlug)
	}
	if err != nil {
		return store.Project{}, err
	}
	fmt.Fprintf(out, "Created the demo project %s (id %d) with %d labels.\n", demoSlug, p.ID, tax.Len())
	return p, nil
}

// demoImport draws the frames the project lacks and imports them through
// the same importer as the CLI and the web upload. It returns every demo
// item's frame number, read back from its file name.
func demoImport(ctx context.Context, out io.Writer, s *store.Store, dataDir string, p store.Project, crowd *demoCrowd) (map[int64]int, error) {
	frameOf, err := demoFrames(ctx, s, p.ID)
	if err != nil {
		return nil, err
	}
	have := map[int]bool{}
	most := -1
	for _, f := range frameOf {
		have[f] = true
		most = max(most, f)
	}
	if most >= len(crowd.plan.labels) {
		return nil, usagef("demo: the demo project already holds frames up to number %d, more than --items %d draws; "+
			"run again with --items %d or more, or add --reset to build it anew", most+1, len(crowd.plan.labels), most+1)
	}
	var missing []int
	for i := range crowd.plan.labels {
		if !have[i] {
			missing = append(missing, i)
		}
	}
	if len(missing) == 0 {
		fmt.Fprintf(out, "All %d images are in already.\n", len(crowd.plan.labels))
		return frameOf, nil
	}
	t0 := time.Now()
	frames, err := renderFrames(ctx, crowd.plan, missing)
	if err != nil {
		return nil, err
	}
	fmt.Fprintf(out, "Drew %d sorting-line frames in %.1fs; importing...\n", len(frames), time.Since(t0).Seconds())
	bs, err := blob.NewLocal(dataDir)
	if err != nil {
		return nil, fmt.Errorf("image store %s: %w", dataDir, err)
	}
	sources := make([]dataset.Source, len(frames))
	for i, f := range frames {
		sources[i] = dataset.Source{Name: f.name, Open: func() (io.ReadCloser, error) {
			return io.NopCloser(bytes.NewReader(f.data)), nil
		}}
	}
	im := &dataset.Importer{Store: s, Blobs: bs}
	rep, err := im.ImportFiles(ctx, p.ID, sources)
	if err != nil {
		return nil, err
	}
	if len(rep.Skipped) > 0 {
		return nil, fmt.Errorf("demo import skipped %s: %s", rep.Skipped[0].Name, rep.Skipped[0].Reason)
	}
	fmt.Fprintf(out, "Imported %d images into %s in %.1fs; %d near-duplicate clusters hold %d of them.\n",
		rep.Imported, dataDir, rep.Elapsed.Seconds(), rep.Clusters, rep.ClusteredItems)
	return demoFrames(ctx, s, p.ID)
}

// demoFrames maps the project's items to the frames they show.
func demoFrames(ctx context.Context, s *store.Store, projectID int64) (map[int64]int, error) {
	out := map[int64]int{}
	var after int64
	for {
		items, err := s.Items(ctx, projectID, store.ItemPage{AfterID: after, Limit: 1000})
		if err != nil {
			return nil, err
		}
		if len(items) == 0 {
			return out, nil
		}
		for _, it := range items {
			if f, ok := demoFrameIndex(it.OriginalName); ok {
				out[it.ID] = f
			}
			after = it.ID
		}
	}
}

// renderFrames draws the frames listed, on every core.
func renderFrames(ctx context.Context, plan demoPlan, frames []int) ([]demoImage, error) {
	out := make([]demoImage, len(frames))
	errs := make([]error, len(frames))
	next := make(chan int)
	var wg sync.WaitGroup
	for range runtime.GOMAXPROCS(0) {
		wg.Go(func() {
			for k := range next {
				out[k], errs[k] = plan.renderFrame(frames[k])
			}
		})
	}
	for k := range frames {
		if ctx.Err() != nil {
			break
		}
		next <- k
	}
	close(next)
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	return out, errors.Join(errs...)
}

// demoAccounts makes the lead and the labellers (or finds them from an
// earlier run) and makes the labellers members. An account of the same
// login that the demo did not make is used as it is, password and all, and
// reported in the warnings.
func demoAccounts(ctx context.Context, s *store.Store, p store.Project, crowd *demoCrowd) ([]demoLabeller, []string, error) {
	var hash string
	var warnings []string
	account := func(login, name, role string) (store.User, error) {
		u, err := s.UserByLogin(ctx, login)
		if err == nil {
			if !strings.HasSuffix(u.DisplayName, demoMark) {
				warnings = append(warnings, fmt.Sprintf("Note: the account %q existed before the demo; its password is its own.", login))
			}
			return u, nil
		}
		if !errors.Is(err, store.ErrNotFound) {
			return store.User{}, err
		}
		if hash == "" {
			// One hash serves every demo account: they share the
			// password anyway, and argon2id is slow on purpose.
			if hash, err = web.HashPassword(demoPassword); err != nil {
				return store.User{}, err
			}
		}
		u, err = s.CreateUser(ctx, store.User{Login: login, DisplayName: name + demoMark, Role: role, PasswordHash: hash})
		if errors.Is(err, store.ErrConflict) {
			return s.UserByLogin(ctx, login)
		}
		return u, err
	}
	if _, err := account(demoLead, "Demo lead", store.RoleLead); err != nil {
		return nil, nil, err
	}
	var people []demoLabeller
	for i, login := range crowd.logins {
		kind := crowd.crowd.Labellers[i].Kind
		u, err := account(login, strings.ToUpper(kind[:1])+kind[1:]+" labeller "+strings.TrimPrefix(login, kind), store.RoleLabeller)
		if err != nil {
			return nil, nil, err
		}
		if u.Role != store.RoleLabeller {
			return nil, nil, fmt.Errorf("demo: the account %q exists and is a %s, not a labeller", login, u.Role)
		}
		if err := s.AddMember(ctx, p.ID, u.ID); err != nil {
			return nil, nil, err
		}
		people = append(people, demoLabeller{index: i, userID: u.ID, login: login, kind: kind})
	}
	return people, warnings, nil
}

// demoGold marks the gold frames' items with the truth from the drawing.
func demoGold(ctx context.Context, s *store.Store, p store.Project, crowd *demoCrowd, frameOf map[int64]int, labelOf map[string]int64) (int, error) {
	known, err := s.GoldLabels(ctx, p.ID)
	if err != nil {
		return 0, err
	}
	n := 0
	for id, f := range frameOf {
		if !crowd.isGold(f) {
			continue
		}
		n++
		if _, ok := known[id]; ok {
			continue
		}
		if err := s.SetGoldAnswer(ctx, p.ID, id, labelOf[crowd.plan.labels[f]], store.GoldSourceGold, nil); err != nil {
			return 0, err
		}
	}
	return n, nil
}

// demoRefit runs the engine's refit, waiting while a serving process holds
// the project's refit lock.
func demoRefit(ctx context.Context, srv *web.Server, projectID int64) error {
	for {
		err := srv.RefitProject(ctx, projectID)
		if !errors.Is(err, web.ErrRefitBusy) {
			return err
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-time.After(200 * time.Millisecond):
		}
	}
}

// demoSummary prints what the demo holds and how to log in.
func demoSummary(ctx context.Context, out io.Writer, s *store.Store, p store.Project, people []demoLabeller, gold int, took time.Duration) error {
	counts, err := s.ProjectStatusCounts(ctx, p.ID)
	if err != nil {
		return err
	}
	votes, secs, err := s.VoteTotals(ctx, p.ID)
	if err != nil {
		return err
	}
	clusters, clustered, err := s.ClusterCounts(ctx, p.ID)
	if err != nil {
		return err
	}
	fmt.Fprintf(out, "\nDemo project %s is ready (set-up took %.1fs):\n", p.Slug, took.Seconds())
	fmt.Fprintf(out, "  %d images (%d near-duplicate clusters hold %d), %d gold items\n", counts.Total, clusters, clustered, gold)
	fmt.Fprintf(out, "  %d simulated votes, %.1f simulated labeller hours; items: %d done, %d for review, %d need votes\n",
		votes, secs/3600, counts.ByStatus["done"], counts.ByStatus["review"], counts.ByStatus["unstarted"]+counts.ByStatus["needs_votes"])
	if sum, _, err := s.ProjectSummary(ctx, p.ID); err == nil && sum.Fleiss.Value != nil {
		fmt.Fprintf(out, "  Fleiss' kappa %.2f (%s)\n", *sum.Fleiss.Value, sum.Fleiss.Band)
	}
	fmt.Fprintln(out, "\nDemo logins (DEMO ONLY: the password is printed here, so never use these accounts on a shared server):")
	tw := tabwriter.NewWriter(out, 0, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  %s\tlead\n", demoLead)
	for _, pl := range people {
		fmt.Fprintf(tw, "  %s\tlabeller (%s, simulated)\n", pl.login, pl.kind)
	}
	tw.Flush()
	fmt.Fprintf(out, "  password for every demo account: %s\n\n%s\n", demoPassword, demoCaution)
	return nil
}
