package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"image"
	_ "image/jpeg"
	_ "image/png"
	"io"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/blob"
	"github.com/concord-labs/concord/taxonomy"
)

// demoCounts is what a demo run leaves in the database; a second run must
// leave the same.
type demoCounts struct {
	projectID                         int64
	items, open, members, gold, votes int
	consensus, clusters               int
}

func countDemo(t *testing.T, s *store.Store) demoCounts {
	t.Helper()
	ctx := context.Background()
	p, err := s.ProjectBySlug(ctx, demoSlug)
	if err != nil {
		t.Fatal(err)
	}
	c := demoCounts{projectID: p.ID}
	sc, err := s.ProjectStatusCounts(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	c.items, c.open = sc.Total, sc.ByStatus["unstarted"]+sc.ByStatus["needs_votes"]
	ms, err := s.Members(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	c.members = len(ms)
	gold, err := s.GoldLabels(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	c.gold = len(gold)
	votes, _, err := s.VoteTotals(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	c.votes = int(votes)
	if err := s.Pool().QueryRow(ctx, `SELECT count(*) FROM consensus WHERE project_id = $1 AND label_id IS NOT NULL`, p.ID).Scan(&c.consensus); err != nil {
		t.Fatal(err)
	}
	if c.clusters, _, err = s.ClusterCounts(ctx, p.ID); err != nil {
		t.Fatal(err)
	}
	return c
}

func TestDemoSetupOnly(t *testing.T) {
	if testing.Short() {
		t.Skip("draws, imports and simulates a crowd")
	}
	ctx := context.Background()
	dir := t.TempDir()
	const n = 120
	args := []string{"demo", "--setup-only", "--items", strconv.Itoa(n), "--data", dir}
	r := runConcord(t, "", args)
	if r.err != nil {
		t.Fatalf("demo: %v\n%s%s", r.err, r.stdout, r.stderr)
	}
	for _, want := range []string{"Demo project demo-sorting-line is ready", "password for every demo account: " + demoPassword,
		"careful1", "random1", "biased1", "local labour law", "show no people"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("output lacks %q:\n%s", want, r.stdout)
		}
	}
	s := testDB.Open(t)
	first := countDemo(t, s)
	// Ten labellers of the default crowd; every item settled by votes or
	// a known answer; at least three votes on every item not gold.
	if first.items != n || first.open != 0 || first.members != 10 || first.consensus != n {
		t.Errorf("after the first run: %+v, want %d items, none open, 10 members, %d consensus rows", first, n, n)
	}
	if first.gold == 0 || first.votes < 3*(first.items-first.gold) || first.clusters == 0 {
		t.Errorf("after the first run: %+v, want gold items, >= 3 votes an item, near-duplicate clusters", first)
	}

	// The simulated crowd votes on what the drawing shows: consensus must
	// mostly match the drawn truth, and gold answers must match it exactly.
	tax, err := taxonomy.ParseString(demoTaxonomy)
	if err != nil {
		t.Fatal(err)
	}
	var leaves []string
	for _, i := range tax.Leaves() {
		leaves = append(leaves, tax.Key(i))
	}
	crowd, err := newDemoCrowd(leaves, n, 1, demoCrowdSpec)
	if err != nil {
		t.Fatal(err)
	}
	frameOf, err := demoFrames(ctx, s, first.projectID)
	if err != nil || len(frameOf) != n {
		t.Fatalf("frames: %d, %v", len(frameOf), err)
	}
	keyOf := map[int64]string{}
	labels, err := s.Labels(ctx, first.projectID)
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range labels {
		keyOf[l.ID] = l.Key
	}
	gold, err := s.GoldLabels(ctx, first.projectID)
	if err != nil {
		t.Fatal(err)
	}
	for item, label := range gold {
		if got, want := keyOf[label], crowd.plan.labels[frameOf[item]]; got != want {
			t.Errorf("gold item %d: %s, drawn as %s", item, got, want)
		}
	}
	right := 0
	rows, err := s.Pool().Query(ctx, `SELECT item_id, label_id FROM consensus WHERE project_id = $1`, first.projectID)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var item, label int64
		if err := rows.Scan(&item, &label); err != nil {
			t.Fatal(err)
		}
		if keyOf[label] == crowd.plan.labels[frameOf[item]] {
			right++
		}
	}
	rows.Close()
	// Consensus must beat the average single labeller (the reason to buy
	// several votes); at 120 items and three or four votes an item it does
	// by ten items or more.
	mean := 0.0
	for _, l := range crowd.crowd.Labellers {
		mean += l.Accuracy / float64(len(crowd.crowd.Labellers))
	}
	t.Logf("consensus matches the drawing on %d of %d; the mean labeller is right on %.0f%%", right, n, 100*mean)
	if float64(right) <= mean*n {
		t.Errorf("consensus matches the drawing on %d of %d items, no better than the mean labeller (%.2f)", right, n, mean)
	}

	// Every stored image decodes to a 320x240 frame.
	bs, err := blob.NewLocal(dir)
	if err != nil {
		t.Fatal(err)
	}
	items, err := s.Items(ctx, first.projectID, store.ItemPage{Limit: n})
	if err != nil {
		t.Fatal(err)
	}
	for _, it := range items {
		rc, err := bs.Open(ctx, it.FileKey)
		if err != nil {
			t.Fatal(err)
		}
		img, _, err := image.Decode(rc)
		rc.Close()
		if err != nil {
			t.Fatalf("%s: %v", it.OriginalName, err)
		}
		if b := img.Bounds(); b.Dx() != demoWidth || b.Dy() != demoHeight {
			t.Errorf("%s: %v, want %dx%d", it.OriginalName, b, demoWidth, demoHeight)
		}
	}

	r = runConcord(t, "", args)
	if r.err != nil {
		t.Fatalf("second demo run: %v", r.err)
	}
	if !strings.Contains(r.stdout, "votes are complete already") {
		t.Errorf("second run did not notice the finished votes:\n%s", r.stdout)
	}
	if again := countDemo(t, s); again != first {
		t.Errorf("second run changed the demo: %+v, was %+v", again, first)
	}

	// Fewer --items than the project holds is refused, saying what to do,
	// and changes nothing (it used to index past the drawn frames).
	fewer := []string{"demo", "--setup-only", "--items", strconv.Itoa(n / 2), "--data", dir}
	r = runConcord(t, "", fewer)
	var ue usageError
	if !errors.As(r.err, &ue) || !strings.Contains(r.err.Error(), "--items "+strconv.Itoa(n)+" or more, or add --reset") {
		t.Errorf("demo --items %d on a %d-item project: %v, want a usage error", n/2, n, r.err)
	}
	if again := countDemo(t, s); again != first {
		t.Errorf("the refused run changed the demo: %+v, was %+v", again, first)
	}

	r = runConcord(t, "", append(args, "--reset"))
	if r.err != nil {
		t.Fatalf("demo --reset: %v", r.err)
	}
	reset := countDemo(t, s)
	if reset.projectID == first.projectID || reset.items != n || reset.open != 0 || reset.members != 10 {
		t.Errorf("after --reset: %+v, want a new project with %d settled items and 10 members", reset, n)
	}
	if !strings.Contains(r.stdout, "Deleted the old demo project") {
		t.Errorf("--reset output:\n%s", r.stdout)
	}
}

// lockedBuffer is a buffer the demo's serving goroutine can write while
// the test reads it.
type lockedBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *lockedBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *lockedBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// demoServing is the line the demo prints once it listens.
var demoServing = regexp.MustCompile(`serving the demo at (http://\S+)/\nLog in as "([^"]+)" \(lead\) or as a labeller, password "([^"]+)"`)

// TestDemoServes runs the demo as a user would (set-up, then serving) on a
// port the system picks, logs in as the lead it prints, and stops it.
func TestDemoServes(t *testing.T) {
	if testing.Short() {
		t.Skip("draws, imports and simulates a crowd, then serves")
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var out, errOut lockedBuffer
	e := &env{stdout: &out, stderr: &errOut, stdin: strings.NewReader(""),
		getenv: func(k string) string { return map[string]string{"DATABASE_URL": testDB.URL}[k] }}
	done := make(chan error, 1)
	// --reset: TestDemoSetupOnly leaves a larger demo behind, and a run
	// with fewer --items than the project holds panics (demo.go, demoGold).
	go func() {
		done <- run(ctx, e, []string{"demo", "--reset", "--items", "10", "--addr", "127.0.0.1:0", "--data", t.TempDir(), "--shutdown-timeout", "5s"})
	}()

	var m []string
	for deadline := time.Now().Add(30 * time.Second); m == nil; time.Sleep(20 * time.Millisecond) {
		select {
		case err := <-done:
			t.Fatalf("demo returned before serving: %v\n%s%s", err, out.String(), errOut.String())
		default:
		}
		if time.Now().After(deadline) {
			t.Fatalf("demo printed no address in 30 s:\n%s", out.String())
		}
		m = demoServing.FindStringSubmatch(out.String())
	}
	base, login, password := m[1], m[2], m[3]
	if strings.HasSuffix(base, ":0") {
		t.Fatalf("demo printed %s, not the port it bound", base)
	}
	if login != demoLead || password != demoPassword {
		t.Errorf("demo prints login %q password %q, want %q and %q", login, password, demoLead, demoPassword)
	}

	resp, err := http.Get(base + "/healthz")
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK || string(body) != "ok\n" {
		t.Errorf("/healthz: %d %q", resp.StatusCode, body)
	}

	// The login form as a browser posts it: same origin, so the
	// cross-origin protection lets it through.
	jar, _ := cookiejar.New(nil)
	c := &http.Client{Jar: jar, Timeout: 30 * time.Second}
	req, _ := http.NewRequest(http.MethodPost, base+"/login", strings.NewReader(url.Values{"login": {login}, "password": {password}}.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("Accept", "application/json")
	req.Header.Set("Origin", base)
	req.Header.Set("Sec-Fetch-Site", "same-origin")
	resp, err = c.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	var who struct{ User, Role string }
	err = json.NewDecoder(resp.Body).Decode(&who)
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK || err != nil || who.User != demoLead || who.Role != store.RoleLead {
		t.Fatalf("login as %s: HTTP %d, %+v, %v", login, resp.StatusCode, who, err)
	}
	// The session works: the lead's project list, refused to anyone else,
	// shows the demo project.
	resp, err = c.Get(base + "/lead/projects")
	if err != nil {
		t.Fatal(err)
	}
	body, _ = io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK || !strings.Contains(string(body), demoSlug) {
		t.Errorf("/lead/projects after login: HTTP %d, mentions %s: %v", resp.StatusCode, demoSlug, strings.Contains(string(body), demoSlug))
	}
	c.CloseIdleConnections()

	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("demo after cancel: %v\n%s", err, errOut.String())
		}
	case <-time.After(10 * time.Second):
		t.Fatal("demo still running 10 s after its context ended")
	}
	if _, err := http.Get(base + "/healthz"); err == nil {
		t.Errorf("%s still answers after the demo returned", base)
	}
}

func TestDemoBadFlags(t *testing.T) {
	r := runConcord(t, "", []string{"demo", "--setup-only", "--items", "3"})
	var ue usageError
	if r.err == nil || !strings.Contains(r.err.Error(), "--items 3") || !errors.As(r.err, &ue) {
		t.Errorf("--items 3: %v, want a usage error naming the flag", r.err)
	}
	r = runConcord(t, "", []string{"demo", "--setup-only", "--items", "20", "--crowd", "careful:2,lazy:1"})
	if r.err == nil || !strings.Contains(r.err.Error(), "lazy") {
		t.Errorf("unknown labeller kind: %v, want an error naming it", r.err)
	}
}

// demoLeaves are the demo taxonomy's leaves in order.
func demoLeaves(t testing.TB) []string {
	t.Helper()
	tax, err := taxonomy.ParseString(demoTaxonomy)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, i := range tax.Leaves() {
		out = append(out, tax.Key(i))
	}
	return out
}

func TestDemoDrawingIsDeterministic(t *testing.T) {
	d, err := newDemoCrowd(demoLeaves(t), 40, 7, demoCrowdSpec)
	if err != nil {
		t.Fatal(err)
	}
	other, err := newDemoCrowd(demoLeaves(t), 40, 8, demoCrowdSpec)
	if err != nil {
		t.Fatal(err)
	}
	for _, i := range []int{0, 13, 39} {
		a, err := d.plan.renderFrame(i)
		if err != nil {
			t.Fatal(err)
		}
		b, err := d.plan.renderFrame(i)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(a.data, b.data) || a.name != b.name {
			t.Errorf("frame %d differs between two drawings with the same seed", i)
		}
		c, err := other.plan.renderFrame(i)
		if err != nil {
			t.Fatal(err)
		}
		if bytes.Equal(a.data, c.data) {
			t.Errorf("frame %d is the same with seeds 7 and 8", i)
		}
	}
	// A smaller demo is a prefix of a larger one, so --items can change
	// between runs without redrawing what is there.
	big, err := newDemoCrowd(demoLeaves(t), 400, 7, demoCrowdSpec)
	if err != nil {
		t.Fatal(err)
	}
	for i := range 40 {
		if big.plan.labels[i] != d.plan.labels[i] || big.plan.dupOf[i] != d.plan.dupOf[i] {
			t.Fatalf("frame %d: %s/%d in a 400-frame demo, %s/%d in a 40-frame one", i,
				big.plan.labels[i], big.plan.dupOf[i], d.plan.labels[i], d.plan.dupOf[i])
		}
	}
}

// drawAlone draws one object of a label in a fixed pose with no noise,
// lamps or occluder, so only the label differs between two drawings.
func drawAlone(key string) *image.RGBA {
	sc := demoScene{label: key, beltSeed: 1, main: objectPose{cx: 160, cy: 120, angle: 0.3, half: 90,
		width: 90 * widthRatio[key], seed: 5}}
	return sc.draw(demoShot{brightness: 1})
}

// meanRGB is the mean colour of an image.
func meanRGB(img *image.RGBA) [3]float64 {
	var m [3]float64
	for i := 0; i < len(img.Pix); i += 4 {
		for c := range 3 {
			m[c] += float64(img.Pix[i+c])
		}
	}
	n := float64(len(img.Pix) / 4)
	return [3]float64{m[0] / n, m[1] / n, m[2] / n}
}

func TestDemoLabelsLookDifferent(t *testing.T) {
	leaves := demoLeaves(t)
	imgs := map[string]*image.RGBA{}
	for _, k := range leaves {
		imgs[k] = drawAlone(k)
	}
	// Every pair of labels differs by a visible amount on average over the
	// frame (the belt, the same in both, dilutes it). 3 of 255 on average
	// is far above the rounding of identical drawings, which is 0.
	for i, a := range leaves {
		for _, b := range leaves[i+1:] {
			pa, pb := imgs[a].Pix, imgs[b].Pix
			sum := 0
			for j := range pa {
				d := int(pa[j]) - int(pb[j])
				sum += max(d, -d)
			}
			if mad := float64(sum) / float64(len(pa)*3/4); mad < 3 {
				t.Errorf("%s and %s differ by %.2f of 255 a channel on average, want at least 3", a, b, mad)
			}
		}
	}
	// Colours that labellers go by.
	m := func(k string) [3]float64 { return meanRGB(imgs[k]) }
	if c := m("cardboard"); c[0]-c[2] <= m("newspaper")[0]-m("newspaper")[2]+5 {
		t.Errorf("cardboard (%v) is not browner than newspaper (%v)", c, m("newspaper"))
	}
	if g := m("green-glass"); g[1] <= g[0] {
		t.Errorf("green glass is not green: %v", g)
	}
	if b := m("brown-glass"); b[0] <= b[2]+3 {
		t.Errorf("brown glass is not amber: %v", b)
	}
	if w, r := m("office-paper"), m("residual-waste"); w[0]+w[1]+w[2] <= r[0]+r[1]+r[2]+20 {
		t.Errorf("office paper (%v) is not brighter than residual waste (%v)", w, r)
	}
}

func TestDemoNearDuplicates(t *testing.T) {
	d, err := newDemoCrowd(demoLeaves(t), 200, 3, demoCrowdSpec)
	if err != nil {
		t.Fatal(err)
	}
	var all []int
	for i := range d.plan.labels {
		all = append(all, i)
	}
	frames, err := renderFrames(context.Background(), d.plan, all)
	if err != nil {
		t.Fatal(err)
	}
	hashes := make([]uint64, len(frames))
	for i, f := range frames {
		img, _, err := image.Decode(bytes.NewReader(f.data))
		if err != nil {
			t.Fatalf("%s: %v", f.name, err)
		}
		hashes[i] = dataset.PHash(img)
	}
	dups := 0
	for i, src := range d.plan.dupOf {
		if src < 0 {
			continue
		}
		dups++
		if d.plan.labels[i] != d.plan.labels[src] {
			t.Errorf("frame %d re-shoots %d but is labelled %s, not %s", i, src, d.plan.labels[i], d.plan.labels[src])
		}
		if dist := dataset.Distance(hashes[i], hashes[src]); dist > dataset.DefaultNearDuplicateDistance {
			t.Errorf("frame %d re-shoots %d at hash distance %d, over the import's %d", i, src, dist, dataset.DefaultNearDuplicateDistance)
		}
		if bytes.Equal(frames[i].data, frames[src].data) {
			t.Errorf("frame %d has the same bytes as %d; a re-shot frame must differ", i, src)
		}
	}
	// About demoDupShare of the frames after the first twelve.
	if dups < 5 || dups > 30 {
		t.Errorf("%d re-shot frames of 200, want about %.0f", dups, demoDupShare*188)
	}
	// Different scenes land far apart: few pairs of originals fall within
	// the near-duplicate distance (look-alikes do happen on a real belt).
	close, pairs := 0, 0
	for i := range hashes {
		for j := range i {
			if d.plan.dupOf[i] >= 0 || d.plan.dupOf[j] >= 0 {
				continue
			}
			pairs++
			if dataset.Distance(hashes[i], hashes[j]) <= dataset.DefaultNearDuplicateDistance {
				close++
			}
		}
	}
	if float64(close) > 0.001*float64(pairs) {
		t.Errorf("%d of %d pairs of different scenes are near-duplicates, want at most 0.1%%", close, pairs)
	}
}

func TestDemoFrameNames(t *testing.T) {
	for _, i := range []int{0, 7, 599, 12345} {
		for _, ext := range []string{"jpg", "png"} {
			if got, ok := demoFrameIndex(demoFrameName(i, ext)); !ok || got != i {
				t.Errorf("frame %d (%s): read back %d, %v", i, ext, got, ok)
			}
		}
	}
	for _, name := range []string{"belt.jpg", "photo-0001.jpg", "belt--1.jpg", ""} {
		if i, ok := demoFrameIndex(name); ok {
			t.Errorf("%q read as frame %d", name, i)
		}
	}
}

func TestDemoVoteID(t *testing.T) {
	a, b := demoVoteID(1, 2, 3), demoVoteID(1, 2, 4)
	if a == b || a != demoVoteID(1, 2, 3) {
		t.Errorf("vote ids %s %s: want stable and distinct", a, b)
	}
	// RFC 9562: 8-4-4-4-12 hex digits, version nibble 8, variant bits 10.
	parts := strings.Split(a, "-")
	if len(parts) != 5 || len(parts[0]) != 8 || len(parts[4]) != 12 || parts[2][0] != '8' || !strings.ContainsAny(parts[3][:1], "89ab") {
		t.Errorf("vote id %s is not a version-8 UUID", a)
	}
}

// BenchmarkDemoFrame draws and encodes one sorting-line frame, the unit of
// the demo's drawing time (600 of them, spread over every core).
func BenchmarkDemoFrame(b *testing.B) {
	d, err := newDemoCrowd(demoLeaves(b), 64, 1, demoCrowdSpec)
	if err != nil {
		b.Fatal(err)
	}
	i := 0
	for b.Loop() {
		if _, err := d.plan.renderFrame(i % 64); err != nil {
			b.Fatal(err)
		}
		i++
	}
}
