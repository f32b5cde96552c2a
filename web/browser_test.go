package web

import (
	"context"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/google/go-cmp/cmp"

	"github.com/concord-labs/concord/store"
)

const chromiumPath = "/usr/bin/chromium"

// browser is a headless Chromium tab logged in as a labeller.
type browser struct {
	t   *testing.T
	ctx context.Context
}

// newBrowser starts Chromium and logs u in, or skips the test when
// Chromium is missing.
func newBrowser(t *testing.T, e *testEnv, u store.User) *browser {
	t.Helper()
	if testing.Short() {
		t.Skip("browser test skipped in -short mode")
	}
	if _, err := os.Stat(chromiumPath); err != nil {
		t.Skipf("Chromium is not installed at %s (apt-get install -y --no-install-recommends chromium; .ci/run installs it)", chromiumPath)
	}
	opts := append(chromedp.DefaultExecAllocatorOptions[:], chromedp.ExecPath(chromiumPath), chromedp.NoSandbox,
		chromedp.DisableGPU, chromedp.Flag("disable-quic", true), chromedp.Flag("disable-component-update", true),
		chromedp.UserDataDir(t.TempDir()), chromedp.WindowSize(1280, 900))
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	t.Cleanup(cancelAlloc)
	ctx, cancel := chromedp.NewContext(actx)
	t.Cleanup(cancel)
	if err := chromedp.Do(ctx); err != nil { // start the browser before any timeout
		t.Fatal(err)
	}
	ctx, cancelTimeout := context.WithTimeout(ctx, 60*time.Second)
	t.Cleanup(cancelTimeout)
	b := &browser{t: t, ctx: ctx}
	b.step("log in",
		chromedp.Navigate(e.ts.URL+"/login"),
		chromedp.WaitVisible(chromedp.CSS(`input[name=login]`)),
		chromedp.SendKeys(chromedp.CSS(`input[name=login]`), u.Login),
		chromedp.SendKeys(chromedp.CSS(`input[name=password]`), testPassword+"\r"),
		chromedp.WaitVisible(chromedp.CSS(`.cards`)),
	)
	return b
}

// step runs actions, failing the test with what the screen says.
func (b *browser) step(what string, actions ...chromedp.Action[chromedp.Void]) {
	b.t.Helper()
	if err := chromedp.Do(b.ctx, actions...); err != nil {
		status, _ := chromedp.Run(b.ctx, chromedp.Evaluate[string](screenState))
		b.t.Fatalf("%s: %v (screen says %q)", what, err, status)
	}
}

// screenState is what a failing step reports of the labelling screen.
const screenState = `(function () {
	var $ = function (id) { return document.getElementById(id); }, img = $("lab-image");
	return $("lab-status").textContent + " | votes " + $("lab-votes").textContent + " | path " + $("lab-path").textContent +
		" | image " + JSON.stringify({hidden: img.hidden, complete: img.complete, width: img.naturalWidth,
			src: img.getAttribute("src"), empty: !$("lab-empty").hidden});
})()`

// poll waits until a JavaScript expression is true.
func poll(expr string) chromedp.Action[chromedp.Void] {
	return chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
		_, err := chromedp.Poll[bool](expr, chromedp.WithPollingTimeout(10*time.Second))(ctx, tg)
		return err
	})
}

// waitVotes waits for the server's tally to reach n with an image shown.
func waitVotes(n int) chromedp.Action[chromedp.Void] {
	return poll(`document.getElementById("lab-votes").textContent === "` + strconv.Itoa(n) + `" && !document.getElementById("lab-image").hidden`)
}

var imageShown = poll(`(function(){var i=document.getElementById("lab-image");return !i.hidden && i.complete && i.naturalWidth > 0})()`)

// votedKeys lists u's votes in p oldest first, as label keys, with the
// sum of their times.
func votedKeys(t *testing.T, e *testEnv, p store.Project, u store.User) (keys []string, seconds float64) {
	t.Helper()
	votes, err := e.store.VotesOfLabeller(context.Background(), p.ID, u.ID)
	if err != nil {
		t.Fatal(err)
	}
	names := map[int64]string{}
	for k, id := range e.labelIDs(p) {
		names[id] = k
	}
	items := map[int64]bool{}
	for i := len(votes) - 1; i >= 0; i-- {
		v := votes[i]
		if items[v.ItemID] {
			t.Errorf("two votes on item %d", v.ItemID)
		}
		items[v.ItemID] = true
		if v.LabelID == nil {
			keys = append(keys, "can't tell")
		} else {
			keys = append(keys, names[*v.LabelID])
		}
		seconds += v.Seconds
	}
	return keys, seconds
}

// openLabelling makes a project of n drawn items and a member, and opens
// the labelling screen as that member in a browser.
func openLabelling(t *testing.T, n int) (*testEnv, store.Project, store.User, *browser) {
	t.Helper()
	e := newTestEnv(t)
	p := e.project()
	e.drawnItems(p, n)
	u := e.member(p)
	b := newBrowser(t, e, u)
	b.step("open the labelling screen", chromedp.Navigate(e.ts.URL+"/p/"+p.Slug+"/label"), imageShown)
	return e, p, u, b
}

// TestBrowserLabelling drives headless Chromium: a labeller logs in and
// labels by keyboard alone (choose, can't tell, skip, undo, search), and the
// votes are then read back from the database.
func TestBrowserLabelling(t *testing.T) {
	e, p, u, b := openLabelling(t, 10)
	// Three leaves fit on one level: 1 PET bottle, 2 Plastic film, 3 glass.
	b.step("vote glass with 3", chromedp.KeyEvent("3"), waitVotes(1), imageShown)
	b.step("vote PET bottle with 1", chromedp.KeyEvent("1"), waitVotes(2), imageShown)
	b.step("can't tell with 0", chromedp.KeyEvent("0"), waitVotes(3), imageShown)
	b.step("skip with s", chromedp.KeyEvent("s"), imageShown)
	b.step("vote plastic film with 2", chromedp.KeyEvent("2"), waitVotes(4), imageShown)
	b.step("vote glass with 3, then undo with u", chromedp.KeyEvent("3"), waitVotes(5), chromedp.KeyEvent("u"), waitVotes(4), imageShown)
	b.step("search with / and pick the first match with Enter",
		chromedp.KeyEvent("/"), chromedp.KeyEvent("film"), chromedp.KeyEvent("\r"), waitVotes(5), imageShown)

	shot, err := chromedp.Run(b.ctx, chromedp.CaptureScreenshot())
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join("testdata", "screenshots")
	if err := os.MkdirAll(dir, 0o755); err == nil {
		os.WriteFile(filepath.Join(dir, "label.png"), shot, 0o644)
	}

	got, total := votedKeys(t, e, p, u)
	// A test presses keys within milliseconds; only the sum of the times
	// is sure to be positive.
	if total <= 0 {
		t.Errorf("no time recorded on any vote")
	}
	want := []string{"glass", "pet-bottle", "can't tell", "plastic-film", "plastic-film"}
	if diff := cmp.Diff(want, got); diff != "" {
		t.Errorf("votes in the database (-want +got):\n%s", diff)
	}
}

// TestBrowserDrillDown labels with a taxonomy of more than nine leaves:
// the labeller opens a group with its number, votes inside it, votes for
// the group itself with Enter, and backs out with Escape.
func TestBrowserDrillDown(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	in := []store.LabelInput{{Key: "plastic", Parent: -1}}
	for _, k := range []string{"pet-bottle", "hdpe-bottle", "plastic-film", "foam-tray", "yoghurt-pot"} {
		in = append(in, store.LabelInput{Key: k, Parent: 0})
	}
	in = append(in, store.LabelInput{Key: "metal", Parent: -1})
	for _, k := range []string{"aluminium-can", "steel-can", "foil", "aerosol"} {
		in = append(in, store.LabelInput{Key: k, Parent: 6})
	}
	in = append(in, store.LabelInput{Key: "glass", Description: "Bottles and jars of any colour", Parent: -1})
	p, err := e.store.CreateProjectWithTaxonomy(ctx, store.Project{Slug: uniq("deep"), Name: "Deep line"}, in)
	if err != nil {
		t.Fatal(err)
	}
	e.drawnItems(p, 6)
	u := e.member(p)
	b := newBrowser(t, e, u)
	b.step("open the labelling screen", chromedp.Navigate(e.ts.URL+"/p/"+p.Slug+"/label"), imageShown)
	// Ten leaves: the first level shows the three top labels.
	b.step("top level", poll(`document.querySelectorAll("#lab-choices button").length === 3`))
	b.step("open metal with 2, vote steel can with 2",
		chromedp.KeyEvent("2"), poll(`document.getElementById("lab-path").textContent === "metal"`),
		chromedp.KeyEvent("2"), waitVotes(1), imageShown)
	b.step("open plastic with 1, vote plastic itself with Enter",
		chromedp.KeyEvent("1"), poll(`document.querySelectorAll("#lab-choices button").length === 5`),
		chromedp.KeyEvent("\r"), waitVotes(2), imageShown)
	b.step("open plastic, back out with Escape, vote glass with 3",
		chromedp.KeyEvent("1"), poll(`document.getElementById("lab-path").textContent === "plastic"`),
		chromedp.KeyEvent("\x1b"), poll(`document.getElementById("lab-path").textContent === "All labels"`),
		chromedp.KeyEvent("3"), waitVotes(3), imageShown)
	got, _ := votedKeys(t, e, p, u)
	if diff := cmp.Diff([]string{"steel-can", "plastic", "glass"}, got); diff != "" {
		t.Errorf("votes in the database (-want +got):\n%s", diff)
	}
}

// TestBrowserNothingLeft: once the labeller has voted on every item, the
// screen shows its message and no image, not a broken one.
func TestBrowserNothingLeft(t *testing.T) {
	_, _, _, b := openLabelling(t, 1)
	b.step("vote glass with 3, the last item", chromedp.KeyEvent("3"), poll(`!document.getElementById("lab-empty").hidden`))
	shown, err := chromedp.Run(b.ctx, chromedp.Evaluate[string](`getComputedStyle(document.getElementById("lab-image")).display + " " +
		getComputedStyle(document.getElementById("lab-empty")).display`))
	if err != nil {
		t.Fatal(err)
	}
	if shown != "none block" {
		t.Errorf("image and message display as %q, want \"none block\"", shown)
	}
}
