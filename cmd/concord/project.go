package main

import (
	"context"
	"fmt"
	"strings"
	"text/tabwriter"

	"github.com/concord-labs/concord/store"
)

const projectUsage = `project create --slug SLUG --name NAME [--taxonomy FILE] [policy and pay flags]
       concord project list`

func runProject(ctx context.Context, e *env, args []string) error {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" {
		fmt.Fprintln(e.stderr, "Usage: concord "+projectUsage)
		if len(args) == 0 {
			return usagef("project: say create or list")
		}
		return nil
	}
	fs := newFlagSet(e, "project "+args[0], projectUsage)
	def, pay := store.DefaultPolicy(), store.DefaultPay()
	slug := fs.String("slug", "", "short name used in URLs and commands (a-z, 0-9, -)")
	name := fs.String("name", "", "display name")
	desc := fs.String("description", "", "what the labellers should know about the project")
	taxFile := fs.String("taxonomy", "", "taxonomy file to import into the new project")
	minVotes := fs.Int("min-votes", def.MinVotes, "votes every item gets before it can be done")
	maxVotes := fs.Int("max-votes", def.MaxVotes, "votes after which an unsure item goes to review")
	target := fs.Float64("target", def.ConfidenceTarget, "consensus confidence at which an item is done (0.5 to 0.999)")
	goldRate := fs.Float64("gold-rate", def.GoldRate, "share of claims that are gold items")
	claim := fs.Int("claim-seconds", def.ClaimSeconds, "how long a claimed item stays reserved")
	floor := fs.Float64("accuracy-floor", def.AccuracyFloor, "gold accuracy under which a labeller is paused")
	payModel := fs.String("pay-model", pay.Model, "per_vote or per_hour")
	rate := fs.Float64("pay-rate", pay.Rate, "pay per vote or per hour, in the currency")
	currency := fs.String("currency", pay.Currency, "ISO 4217 code")
	if err := parseFlags(e, fs, args[1:]); err != nil {
		return err
	}
	switch args[0] {
	case "create":
		if *slug == "" || *name == "" {
			return usagef("project create: need --slug and --name")
		}
		p := store.Project{Slug: *slug, Name: *name, Description: *desc,
			Policy: store.VotePolicy{MinVotes: *minVotes, MaxVotes: *maxVotes, ConfidenceTarget: *target,
				GoldRate: *goldRate, ClaimSeconds: *claim, AccuracyFloor: *floor},
			Pay: store.PayModel{Model: *payModel, Rate: *rate, Currency: strings.ToUpper(*currency)}}
		if err := checkPolicyFlags(p); err != nil {
			return err
		}
		// Check the taxonomy before touching the database, so a bad file writes nothing.
		var labels []store.LabelInput
		if *taxFile != "" {
			t, err := readTaxonomyFile(*taxFile)
			if err != nil {
				return err
			}
			labels = store.LabelInputsOf(t)
		}
		s, closeDB, err := openStore(ctx, e)
		if err != nil {
			return err
		}
		defer closeDB()
		p, err = s.CreateProjectWithTaxonomy(ctx, p, labels)
		if err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "project %s created (id %d, %d labels)\n", p.Slug, p.ID, len(labels))
		return nil
	case "list":
		s, closeDB, err := openStore(ctx, e)
		if err != nil {
			return err
		}
		defer closeDB()
		ps, err := s.ListProjects(ctx)
		if err != nil {
			return err
		}
		tw := tabwriter.NewWriter(e.stdout, 0, 4, 2, ' ', 0)
		fmt.Fprintln(tw, "SLUG\tNAME\tVOTES\tTARGET\tPAY")
		for _, p := range ps {
			fmt.Fprintf(tw, "%s\t%s\t%d-%d\t%.2f\t%.4g %s %s\n", p.Slug, p.Name, p.Policy.MinVotes, p.Policy.MaxVotes,
				p.Policy.ConfidenceTarget, p.Pay.Rate, p.Pay.Currency, p.Pay.Model)
		}
		return tw.Flush()
	default:
		return usagef("project: unknown action %q (create or list)", args[0])
	}
}

// checkPolicyFlags names the flag that breaks a rule of the projects
// table, so a bad value gets a plain message instead of the database's
// constraint error. The bounds are the table's CHECKs (migrations/0001).
func checkPolicyFlags(p store.Project) error {
	pol, pay := p.Policy, p.Pay
	switch {
	case pol.MinVotes < 1 || pol.MinVotes > 50:
		return usagef("project create: --min-votes %d: must be between 1 and 50", pol.MinVotes)
	case pol.MaxVotes < 1 || pol.MaxVotes > 50:
		return usagef("project create: --max-votes %d: must be between 1 and 50", pol.MaxVotes)
	case pol.MaxVotes < pol.MinVotes:
		return usagef("project create: --max-votes %d: must be at least --min-votes (%d)", pol.MaxVotes, pol.MinVotes)
	case !(pol.ConfidenceTarget >= store.MinConfidenceTarget && pol.ConfidenceTarget <= store.MaxConfidenceTarget):
		return usagef("project create: --target %g: must be between %g and %g", pol.ConfidenceTarget, store.MinConfidenceTarget, store.MaxConfidenceTarget)
	case !(pol.GoldRate >= 0 && pol.GoldRate <= 0.5):
		return usagef("project create: --gold-rate %g: must be between 0 and 0.5", pol.GoldRate)
	case pol.ClaimSeconds < 10 || pol.ClaimSeconds > 86400:
		return usagef("project create: --claim-seconds %d: must be between 10 and 86400", pol.ClaimSeconds)
	case !(pol.AccuracyFloor >= 0 && pol.AccuracyFloor <= 1):
		return usagef("project create: --accuracy-floor %g: must be between 0 and 1", pol.AccuracyFloor)
	case pay.Model != store.PayPerVote && pay.Model != store.PayPerHour:
		return usagef("project create: --pay-model %q: must be per_vote or per_hour", pay.Model)
	case !(pay.Rate >= 0 && pay.Rate <= store.MaxPayRate):
		return usagef("project create: --pay-rate %g: must be between 0 and %g", pay.Rate, store.MaxPayRate)
	case len(pay.Currency) != 3 || strings.Trim(pay.Currency, "ABCDEFGHIJKLMNOPQRSTUVWXYZ") != "":
		return usagef("project create: --currency %q: must be a three-letter ISO 4217 code such as EUR", pay.Currency)
	}
	return nil
}
