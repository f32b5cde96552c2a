package web

import (
	"context"
	"io/fs"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/PuerkitoBio/goquery"

	"github.com/concord-labs/concord/agreement"
	"github.com/concord-labs/concord/store"
)

// figureVotes: 4 labellers (columns) on 12 items (rows); "" is no vote.
// Labellers 0 and 1 vote on every item and labeller 2 on the first ten, so
// the pairs 0-1 (12 items), 0-2 and 1-2 (10 items each) reach
// agreement.DefaultMinShared; labeller 3 shares at most 3 items with anyone
// and must not appear in the pairs table.
var figureVotes = [][4]string{
	{"glass", "glass", "glass", ""},
	{"glass", "glass", "pet-bottle", ""},
	{"pet-bottle", "pet-bottle", "pet-bottle", ""},
	{"pet-bottle", "plastic-film", "pet-bottle", ""},
	{"plastic-film", "plastic-film", "plastic-film", ""},
	{"glass", "pet-bottle", "glass", ""},
	{"plastic-film", "plastic-film", "glass", ""},
	{"glass", "glass", "glass", ""},
	{"pet-bottle", "pet-bottle", "plastic-film", ""},
	{"plastic-film", "glass", "plastic-film", "plastic-film"},
	{"glass", "glass", "", "glass"},
	{"pet-bottle", "pet-bottle", "", "plastic-film"},
}

// figureSeconds is the time labeller j took on item i. Labeller 0 then
// took 2,3,4,5 s three times each: sorted, the 6th and 7th of 12 are 3 and
// 4, median 3.5 s. Labeller 1: 3,4,5,6 three times each, median 4.5 s.
// Labeller 2 (items 0-9): 4,4,4,5,5,5,6,6,7,7, median (5+5)/2 = 5.0 s.
// Labeller 3 (items 9-11): 6,7,8, median 7.0 s.
func figureSeconds(i, j int) float64 { return float64(2 + j + i%4) }

var figureMedians = []string{"3.5 s", "4.5 s", "5.0 s", "7.0 s"}

// figuresProject is a project holding figureVotes, fitted once by the
// engine, with the same votes built for agreement in the engine's class
// order (taxonomy pre-order, the inner "plastic" included) so a fit by
// hand reproduces the engine's.
type figuresProject struct {
	p         store.Project
	items     []int64
	labellers []store.User
	b         *agreement.Builder
	votes     *agreement.Votes
}

func (e *testEnv) figuresProject() figuresProject {
	e.t.Helper()
	b, err := agreement.NewBuilderWithClasses([]string{"plastic", "pet-bottle", "plastic-film", "glass"})
	if err != nil {
		e.t.Fatal(err)
	}
	rows := make([][]string, len(figureVotes))
	for i := range figureVotes {
		rows[i] = figureVotes[i][:]
	}
	k := figuresProject{b: b}
	k.p, k.items, k.labellers = e.votedProject(rows, 4, b,
		func(u store.User, _ int) string { return u.Login }, figureSeconds)
	k.votes = b.Build()
	return k
}

// cells returns the trimmed text of each td of a row.
func cells(row *goquery.Selection) []string {
	var out []string
	row.Find("td").Each(func(_ int, s *goquery.Selection) { out = append(out, strings.TrimSpace(s.Text())) })
	return out
}

// TestAgreementPageFigures checks the Cohen pairs, Krippendorff's alpha
// and the per-label kappas against agreement run on the same votes.
func TestAgreementPageFigures(t *testing.T) {
	e := newTestEnv(t)
	lead := e.login(e.user(store.RoleLead))
	k := e.figuresProject()
	doc := page(t, lead.get("/lead/p/"+k.p.Slug+"/agreement"), http.StatusOK)

	pairs, err := agreement.PairwiseCohen(k.votes, agreement.PairOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(pairs) != 3 {
		t.Fatalf("agreement.PairwiseCohen found %d pairs, the data set is built for 3", len(pairs))
	}
	names := k.b.LabellerNames()
	// The page orders a pair by activity, agreement by id; kappa and its
	// standard error do not depend on which labeller is the row.
	want := map[[2]string][]string{}
	for _, p := range pairs {
		a, b := names[p.A], names[p.B]
		if a > b {
			a, b = b, a
		}
		want[[2]string{a, b}] = []string{fmtInt(p.Items), fmtStat3(p.Kappa), fmtStat3(p.SE)}
	}
	rows := doc.Find("#pairs tbody tr")
	if rows.Length() != len(want) {
		t.Errorf("%d pair rows, want %d", rows.Length(), len(want))
	}
	rows.Each(func(_ int, s *goquery.Selection) {
		c := cells(s)
		if len(c) != 5 {
			t.Errorf("pair row %q: want 5 cells", c)
			return
		}
		a, b := c[0], c[1]
		if a > b {
			a, b = b, a
		}
		w, ok := want[[2]string{a, b}]
		if !ok {
			t.Errorf("pair %s-%s shown, agreement.PairwiseCohen does not report it", c[0], c[1])
			return
		}
		if got := c[2:]; strings.Join(got, "|") != strings.Join(w, "|") {
			t.Errorf("pair %s-%s: items, kappa, SE = %q, agreement gives %q", c[0], c[1], got, w)
		}
	})
	if doc.Find("#no-pairs").Length() != 0 {
		t.Error("says no pair shares enough items, though three do")
	}

	alpha, err := agreement.Alpha(k.votes, agreement.AlphaOptions{Metric: agreement.Nominal})
	if err != nil {
		t.Fatal(err)
	}
	if got := text(doc, "#fig-alpha .value"); got != fmtStat3(alpha.Alpha) {
		t.Errorf("alpha shown %q, agreement.Alpha gives %s", got, fmtStat3(alpha.Alpha))
	}

	fl, err := agreement.Fleiss(k.votes)
	if err != nil {
		t.Fatal(err)
	}
	// Every leaf got votes and none got all of them, so each has a kappa row.
	leaves := []string{"pet-bottle", "plastic-film", "glass"}
	if n := doc.Find("#kappa-by-label tbody tr").Length(); n != len(leaves) {
		t.Errorf("%d per-label rows, want %d", n, len(leaves))
	}
	for _, key := range leaves {
		c, _ := k.b.ClassID(key)
		if !fl.CategoryOK[c] {
			t.Fatalf("agreement.Fleiss has no kappa for %s", key)
		}
		got := strings.TrimSpace(doc.Find(`#kappa-by-label tr[data-label="` + key + `"] td.num`).Text())
		if got != fmtStat3(fl.PerCategory[c]) {
			t.Errorf("%s kappa shown %q, agreement.Fleiss gives %s", key, got, fmtStat3(fl.PerCategory[c]))
		}
	}
}

// TestAgreementPageNoPairs: with six items no pair reaches ten shared
// items, and the page says so instead of showing an empty table.
func TestAgreementPageNoPairs(t *testing.T) {
	e := newTestEnv(t)
	lead := e.login(e.user(store.RoleLead))
	k := e.knownProject()
	if pairs, err := agreement.PairwiseCohen(k.votes, agreement.PairOptions{}); err != nil || len(pairs) != 0 {
		t.Fatalf("the known project should have no pair with %d shared items: %v, %v", agreement.DefaultMinShared, pairs, err)
	}
	doc := page(t, lead.get("/lead/p/"+k.p.Slug+"/agreement"), http.StatusOK)
	want := "No two labellers share " + strconv.Itoa(agreement.DefaultMinShared) + " items yet"
	if got := text(doc, "#no-pairs"); !strings.HasPrefix(got, want) {
		t.Errorf("pairs section says %q, want it to start %q", got, want)
	}
	if n := doc.Find("#pairs tbody tr").Length(); n != 0 {
		t.Errorf("%d pair rows with no pair to show", n)
	}
}

// TestLabellerAndItemFigures checks the labellers page, one labeller's page
// and one item's page against a Dawid-Skene fit and reliability report run
// by hand on the same votes, and against what the store holds.
func TestLabellerAndItemFigures(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	lead := e.login(e.user(store.RoleLead))
	k := e.figuresProject()
	ds, err := agreement.DawidSkene(k.votes, agreement.DawidSkeneOptions{Fixed: map[int]int{}})
	if err != nil {
		t.Fatal(err)
	}
	reports, err := agreement.Reliability(k.votes, ds, map[int]int{}, agreement.ReliabilityOptions{})
	if err != nil {
		t.Fatal(err)
	}
	stored, err := e.store.LabellerRows(ctx, k.p.ID)
	if err != nil {
		t.Fatal(err)
	}
	byID := map[int64]store.LabellerRow{}
	for _, r := range stored {
		byID[r.User.ID] = r
	}

	doc := page(t, lead.get("/lead/p/"+k.p.Slug+"/labellers"), http.StatusOK)
	for j, u := range k.labellers {
		l, _ := k.b.LabellerID(u.Login)
		rep := reports[l]
		row := doc.Find(`#labellers tr[data-login="` + u.Login + `"]`)
		c := cells(row)
		if len(c) < 6 {
			t.Fatalf("%s row %q", u.Login, c)
		}
		if c[2] != figureMedians[j] {
			t.Errorf("%s median %q, want %s", u.Login, c[2], figureMedians[j])
		}
		if got, want := c[3], fmtPct(rep.EstimatedAccuracy); got != want {
			t.Errorf("%s estimated accuracy %q, a fit by hand gives %s", u.Login, got, want)
		}
		if got, want := c[5], fmtPct(rep.ConsensusAgreement); got != want {
			t.Errorf("%s agreement with consensus %q, agreement.Reliability gives %s", u.Login, got, want)
		}
		st := byID[u.ID]
		if c[2] != fmtSeconds(st.MedianSeconds) || c[3] != fmtPctPtr(st.Accuracy) || c[5] != fmtPctPtr(st.Agreement) {
			t.Errorf("%s row %q differs from the store's %v / %v / %v", u.Login, c, st.MedianSeconds, st.Accuracy, st.Agreement)
		}
	}

	// Labeller 2 voted on ten items, so their figures are not those of
	// the two who voted on all.
	u := k.labellers[2]
	l, _ := k.b.LabellerID(u.Login)
	doc = page(t, lead.get("/lead/p/"+k.p.Slug+"/labellers/"+i64(u.ID)), http.StatusOK)
	for sel, want := range map[string]string{
		"#fig-votes":     "10",
		"#fig-median":    figureMedians[2],
		"#fig-accuracy":  fmtPct(reports[l].EstimatedAccuracy),
		"#fig-agreement": fmtPct(reports[l].ConsensusAgreement),
	} {
		if got := text(doc, sel+" .value"); got != want {
			t.Errorf("labeller page %s = %q, want %q", sel, got, want)
		}
	}

	// Item 5: glass, pet-bottle, glass.
	item, _ := k.b.ItemID("5")
	best := ds.Label[item]
	keys := k.b.ClassNames()
	cons, err := e.store.ConsensusOf(ctx, k.p.ID, k.items[5])
	if err != nil {
		t.Fatal(err)
	}
	if labels := e.labelIDs(k.p); cons.LabelID == nil || *cons.LabelID != labels[keys[best]] {
		t.Errorf("stored consensus %v, a fit by hand gives %s", cons.LabelID, keys[best])
	}
	doc = page(t, lead.get("/lead/p/"+k.p.Slug+"/items/"+i64(k.items[5])), http.StatusOK)
	if got := text(doc, "#fig-consensus .value"); got != keys[best] {
		t.Errorf("item consensus %q, a fit by hand gives %s", got, keys[best])
	}
	conf := ds.PosteriorOf(item)[best]
	if got := text(doc, "#fig-confidence .value"); got != fmtPct(conf) || got != fmtPct(cons.Confidence) {
		t.Errorf("item confidence %q; fit by hand %s, store %s", got, fmtPct(conf), fmtPct(cons.Confidence))
	}
}

// writeBelt writes a sorting-line frame (beltPNG: different every call).
func writeBelt(t *testing.T, path string) {
	t.Helper()
	if err := os.WriteFile(path, beltPNG(t), 0o644); err != nil {
		t.Fatal(err)
	}
}

// countFiles counts the regular files under dir, skipping skip.
func countFiles(t *testing.T, dir, skip string) int {
	t.Helper()
	n := 0
	err := filepath.WalkDir(dir, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if path == skip && d.IsDir() {
			return filepath.SkipDir
		}
		if d.Type().IsRegular() {
			n++
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// TestSetupImportFolder drives the server-side folder import: only folders
// under the server's import root may be read.
func TestSetupImportFolder(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	p := e.project()
	lead := e.login(e.user(store.RoleLead))
	path := "/lead/p/" + p.Slug + "/setup/import"
	root := e.srv.importRoot()
	dir := filepath.Join(root, "belt-camera", "day-1")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	for i := range 3 {
		writeBelt(t, filepath.Join(dir, "belt-"+strconv.Itoa(i)+".png"))
	}
	// Images outside the root that an escaping path would reach: were any
	// of them imported, the project's item count would grow.
	outside := t.TempDir()
	writeBelt(t, filepath.Join(outside, "elsewhere.png"))
	if err := os.Symlink(outside, filepath.Join(root, "link-out")); err != nil {
		t.Fatal(err)
	}

	total := func() int {
		c, err := e.store.ProjectStatusCounts(ctx, p.ID)
		if err != nil {
			t.Fatal(err)
		}
		return c.Total
	}
	dataDir := e.srv.cfg.DataDir
	blobsBefore := countFiles(t, dataDir, root)
	rel, err := filepath.Rel(dataDir, outside)
	if err != nil {
		t.Fatal(err)
	}
	// A path that names the outside is refused before the file system is
	// touched; a symlink out is caught once it is resolved.
	notRelative := "Folder: give a path relative to " + root
	for bad, want := range map[string]string{"../": notRelative, "../" + rel: notRelative,
		"belt-camera/../../" + rel: notRelative, outside: notRelative, "link-out": `Folder: "link-out" leads outside`} {
		doc := page(t, lead.postForm(path, url.Values{"folder": {bad}}), http.StatusUnprocessableEntity)
		if got := text(doc, "#images .problem"); !strings.HasPrefix(got, want) {
			t.Errorf("%q: error %q, want it to start %q", bad, got, want)
		}
		if n := total(); n != 0 {
			t.Fatalf("%q: %d items stored from outside the import root", bad, n)
		}
	}
	if n := countFiles(t, dataDir, root); n != blobsBefore {
		t.Errorf("refused imports wrote %d files", n-blobsBefore)
	}

	doc := page(t, lead.postForm(path, url.Values{"folder": {"belt-camera"}}), http.StatusOK)
	if got := text(doc, "#images .saved p"); !strings.HasPrefix(got, "Imported 3 new images of 3 files;") {
		t.Errorf("first import says %q", got)
	}
	if n := total(); n != 3 {
		t.Errorf("%d items after the first import, want 3", n)
	}
	doc = page(t, lead.postForm(path, url.Values{"folder": {"belt-camera/day-1"}}), http.StatusOK)
	if got := text(doc, "#images .saved p"); !strings.HasPrefix(got, "Imported 0 new images of 3 files; 3 were in the project already") {
		t.Errorf("second import says %q", got)
	}
	if n := total(); n != 3 {
		t.Errorf("%d items after the second import, want 3", n)
	}
}
