package web

import (
	"context"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"github.com/concord-labs/concord/store"
)

const leadChromium = "/usr/bin/chromium"

// TestLeadPagesInBrowser opens every lead page in headless Chromium, checks
// that each shows its heading (so the CSP let its CSS and SVG through), and
// saves a full-page screenshot to web/testdata/screenshots/ as an artifact.
func TestLeadPagesInBrowser(t *testing.T) {
	if testing.Short() {
		t.Skip("browser test skipped under -short")
	}
	if _, err := os.Stat(leadChromium); err != nil {
		t.Skip("chromium not found at " + leadChromium + "; install it with: apt-get install -y --no-install-recommends chromium")
	}
	e := newTestEnv(t)
	k := e.knownProject()
	lead := e.user(store.RoleLead)
	outDir := filepath.Join("testdata", "screenshots")
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		t.Fatal(err)
	}
	opts := append(chromedp.DefaultExecAllocatorOptions[:], chromedp.ExecPath(leadChromium), chromedp.NoSandbox,
		chromedp.DisableGPU, chromedp.Flag("disable-quic", true), chromedp.Flag("disable-component-update", true),
		chromedp.UserDataDir(t.TempDir()), chromedp.WindowSize(1280, 900))
	actx, cancelA := chromedp.NewExecAllocator(context.Background(), opts...)
	defer cancelA()
	ctx, cancel := chromedp.NewContext(actx)
	defer cancel()
	ctx, cancelT := context.WithTimeout(ctx, 2*time.Minute)
	defer cancelT()

	err := chromedp.Do(ctx,
		chromedp.Navigate(e.ts.URL+"/login"),
		chromedp.SendKeys(chromedp.CSS(`input[name=login]`), lead.Login),
		chromedp.SendKeys(chromedp.CSS(`input[name=password]`), testPassword),
		chromedp.Submit(chromedp.CSS(`input[name=password]`)),
		// The login page has an h1 too: wait for the start page's project
		// cards, or the next navigation could abort the login's POST.
		chromedp.WaitVisible(chromedp.CSS(`.cards`)),
	)
	if err != nil {
		t.Fatalf("log in: %v", err)
	}
	base := "/lead/p/" + k.p.Slug
	for _, pg := range []struct{ name, path, h1 string }{
		{"projects", "/lead/projects", "Projects"},
		{"new-project", "/lead/projects/new", "New project"},
		{"setup", base + "/setup", "Setup"},
		{"progress", base + "/progress", "Progress"},
		{"agreement", base + "/agreement", "Agreement"},
		{"labellers", base + "/labellers", "Labellers"},
		{"labeller", base + "/labellers/" + i64(k.labellers[0].ID), "Labeller " + k.labellers[0].DisplayName},
		{"items", base + "/items", "Items"},
		{"item", base + "/items/" + i64(k.items[0]), "Item " + i64(k.items[0])},
		{"cost", base + "/cost", "Cost"},
		{"releases", base + "/releases", "Releases"},
	} {
		if err := chromedp.Do(ctx, chromedp.Navigate(e.ts.URL+pg.path), chromedp.WaitVisible(chromedp.CSS(`.lead h1`))); err != nil {
			t.Errorf("%s: %v", pg.name, err)
			continue
		}
		h1, err := chromedp.Run(ctx, chromedp.Text(chromedp.CSS(`.lead h1`)))
		if err != nil || h1 != pg.h1 {
			t.Errorf("%s: heading %q (%v), want %q", pg.name, h1, err, pg.h1)
		}
		shot, err := chromedp.Run(ctx, chromedp.FullScreenshot(90)) // JPEG below quality 100
		if err != nil {
			t.Errorf("%s screenshot: %v", pg.name, err)
			continue
		}
		if err := os.WriteFile(filepath.Join(outDir, "lead-"+pg.name+".jpg"), shot, 0o644); err != nil {
			t.Fatal(err)
		}
	}
}
