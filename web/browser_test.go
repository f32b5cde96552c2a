package web

import (
	"context"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

const chromiumPath = "/usr/bin/chromium"

// TestBrowserLabelling drives headless Chromium: a labeller logs in and
// labels by keyboard alone (choose, can't tell, skip, undo), and the votes
// are then read back from the database.
func TestBrowserLabelling(t *testing.T) {
	if testing.Short() {
		t.Skip("browser test skipped in -short mode")
	}
	if _, err := os.Stat(chromiumPath); err != nil {
		t.Skipf("Chromium is not installed at %s (apt-get install -y --no-install-recommends chromium; .ci/run installs it)", chromiumPath)
	}
	e := newTestEnv(t)
	p := e.project()
	e.drawnItems(p, 10)
	u := e.member(p)
	lab := e.labelIDs(p)

	opts := append(chromedp.DefaultExecAllocatorOptions[:], chromedp.ExecPath(chromiumPath), chromedp.NoSandbox,
		chromedp.DisableGPU, chromedp.Flag("disable-quic", true), chromedp.Flag("disable-component-update", true),
		chromedp.UserDataDir(t.TempDir()), chromedp.WindowSize(1280, 900))
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	defer cancelAlloc()
	ctx, cancel := chromedp.NewContext(actx)
	defer cancel()
	if err := chromedp.Do(ctx); err != nil { // start the browser before any timeout
		t.Fatal(err)
	}
	ctx, cancelTimeout := context.WithTimeout(ctx, 60*time.Second)
	defer cancelTimeout()

	step := func(what string, actions ...chromedp.Action[chromedp.Void]) {
		t.Helper()
		if err := chromedp.Do(ctx, actions...); err != nil {
			status, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById("lab-status").textContent + " | votes " + document.getElementById("lab-votes").textContent + " | search " + document.getElementById("lab-search").value + " | focus " + (document.activeElement && document.activeElement.id)`))
			t.Fatalf("%s: %v (screen says %q)", what, err, status)
		}
	}
	// waitVotes waits for the server's tally to reach n.
	waitVotes := func(n int) chromedp.Action[chromedp.Void] {
		return chromedp.Steps(
			chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
				_, err := chromedp.Poll[bool](`document.getElementById("lab-votes").textContent === "`+strconv.Itoa(n)+`" && !document.getElementById("lab-image").hidden`,
					chromedp.WithPollingTimeout(10*time.Second))(ctx, tg)
				return err
			}),
		)
	}
	imageShown := chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
		_, err := chromedp.Poll[bool](`(function(){var i=document.getElementById("lab-image");return !i.hidden && i.complete && i.naturalWidth > 0})()`,
			chromedp.WithPollingTimeout(10*time.Second))(ctx, tg)
		return err
	})

	step("log in",
		chromedp.Navigate(e.ts.URL+"/login"),
		chromedp.WaitVisible(chromedp.CSS(`input[name=login]`)),
		chromedp.SendKeys(chromedp.CSS(`input[name=login]`), u.Login),
		chromedp.SendKeys(chromedp.CSS(`input[name=password]`), testPassword+"\r"),
		chromedp.WaitVisible(chromedp.CSS(`.cards`)),
	)
	step("open the labelling screen",
		chromedp.Navigate(e.ts.URL+"/p/"+p.Slug+"/label"),
		imageShown,
	)
	// Three leaves fit on one level: 1 PET bottle, 2 Plastic film, 3 glass.
	step("vote glass with 3", chromedp.KeyEvent("3"), waitVotes(1), imageShown)
	step("vote PET bottle with 1", chromedp.KeyEvent("1"), waitVotes(2), imageShown)
	step("can't tell with 0", chromedp.KeyEvent("0"), waitVotes(3), imageShown)
	step("skip with s", chromedp.KeyEvent("s"), imageShown)
	step("vote plastic film with 2", chromedp.KeyEvent("2"), waitVotes(4), imageShown)
	step("vote glass with 3, then undo with u", chromedp.KeyEvent("3"), waitVotes(5), chromedp.KeyEvent("u"), waitVotes(4), imageShown)
	step("search with / and pick the first match with Enter",
		chromedp.KeyEvent("/"), chromedp.KeyEvent("film"), chromedp.KeyEvent("\r"), waitVotes(5), imageShown)

	shot, err := chromedp.Run(ctx, chromedp.CaptureScreenshot())
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join("testdata", "screenshots")
	if err := os.MkdirAll(dir, 0o755); err == nil {
		os.WriteFile(filepath.Join(dir, "label.png"), shot, 0o644)
	}

	votes, err := e.store.VotesOfLabeller(context.Background(), p.ID, u.ID)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	total := 0.0
	names := map[int64]string{}
	for k, id := range lab {
		names[id] = k
	}
	for i := len(votes) - 1; i >= 0; i-- { // oldest first
		if votes[i].LabelID == nil {
			got = append(got, "can't tell")
		} else {
			got = append(got, names[*votes[i].LabelID])
		}
		total += votes[i].Seconds
	}
	// A test presses keys within milliseconds; the time kept is rounded
	// to 0.1 s, so only the sum is sure to be positive.
	if total <= 0 {
		t.Errorf("no time recorded on any vote")
	}
	want := []string{"glass", "pet-bottle", "can't tell", "plastic-film", "plastic-film"}
	if len(got) != len(want) {
		t.Fatalf("votes in the database = %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("votes in the database = %v, want %v", got, want)
		}
	}
	items := map[int64]bool{}
	for _, v := range votes {
		if items[v.ItemID] {
			t.Errorf("two votes on item %d", v.ItemID)
		}
		items[v.ItemID] = true
	}
}
