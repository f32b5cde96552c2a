package web

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"go/ast"
	"go/parser"
	"go/token"
	"image"
	"image/color"
	"image/png"
	"io"
	"net/http"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/PuerkitoBio/goquery"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/blob"
)

var drawSeq int

// beltPNG draws a small sorting-line frame: a grey belt with a few
// coloured shapes, different for every call.
func beltPNG(t testing.TB) []byte {
	drawSeq++
	n := drawSeq
	img := image.NewRGBA(image.Rect(0, 0, 64, 48))
	for y := range 48 {
		for x := range 64 {
			g := uint8(120 + (x+y)%8)
			if y < 6 || y > 41 {
				g = 60
			}
			img.Set(x, y, color.RGBA{g, g, g, 255})
		}
	}
	for k := range 3 {
		cx, cy, r := 8+(n*7+k*19)%48, 12+(n*5+k*11)%24, 3+(n+k)%5
		c := color.RGBA{uint8(40 + 70*k), uint8(200 - n%150), uint8(n * 37 % 255), 255}
		for y := cy - r; y <= cy+r; y++ {
			for x := cx - r; x <= cx+r; x++ {
				if (x-cx)*(x-cx)+(y-cy)*(y-cy) <= r*r {
					img.Set(x, y, c)
				}
			}
		}
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// drawnItems draws n images into the server's image store and adds them
// to the project; it returns their ids in order.
func (e *testEnv) drawnItems(p store.Project, n int) []int64 {
	e.t.Helper()
	return addDrawnItems(e.t, e.store, e.srv.cfg.DataDir, p.ID, n)
}

func addDrawnItems(t testing.TB, s *store.Store, dataDir string, projectID int64, n int) []int64 {
	t.Helper()
	ctx := context.Background()
	bs, err := blob.NewLocal(dataDir)
	if err != nil {
		t.Fatal(err)
	}
	items := make([]store.NewItem, n)
	for i := range items {
		b := beltPNG(t)
		sum := sha256.Sum256(b)
		key := hex.EncodeToString(sum[:])
		if _, err := bs.Put(ctx, key, bytes.NewReader(b)); err != nil {
			t.Fatal(err)
		}
		items[i] = store.NewItem{SHA256: sum, FileKey: key, OriginalName: fmt.Sprintf("belt-%04d.png", i),
			MediaType: "image/png", Bytes: int64(len(b)), Width: 64, Height: 48}
	}
	got, err := s.InsertItems(ctx, projectID, items)
	if err != nil {
		t.Fatal(err)
	}
	ids := make([]int64, n)
	for i, it := range items {
		ids[i] = got[it.SHA256]
	}
	return ids
}

// member makes a labeller who belongs to p.
func (e *testEnv) member(p store.Project) store.User {
	e.t.Helper()
	u := e.user(store.RoleLabeller)
	if err := e.store.AddMember(context.Background(), p.ID, u.ID); err != nil {
		e.t.Fatal(err)
	}
	return u
}

// apiResult decodes a labelling API answer, failing unless the status is want.
func apiResult(t *testing.T, resp *http.Response, want int) labelResponseJSON {
	t.Helper()
	b, _ := io.ReadAll(resp.Body)
	if resp.StatusCode != want {
		t.Fatalf("%s %s: status %d, want %d: %s", resp.Request.Method, resp.Request.URL.Path, resp.StatusCode, want, b)
	}
	var out labelResponseJSON
	if err := json.Unmarshal(b, &out); err != nil {
		t.Fatalf("%s: %v in %s", resp.Request.URL.Path, err, b)
	}
	return out
}

// labelResponseJSON reads the API's answers, errors included.
type labelResponseJSON struct {
	Next     *itemJSON     `json:"next"`
	Item     *itemJSON     `json:"item"`
	Tally    *store.Tally  `json:"tally"`
	Feedback *goldFeedback `json:"feedback"`
	Repeat   bool          `json:"repeat"`
	Error    string        `json:"error"`
}

func voteBody(id string, item int64, label string, exclude ...int64) string {
	b, _ := json.Marshal(map[string]any{"id": id, "item": item, "label": nilIfEmpty(label), "seconds": 1.5, "exclude": exclude, "tally": true})
	return string(b)
}

func nilIfEmpty(s string) any {
	if s == "" {
		return nil
	}
	return s
}

func uuidN(n int) string { return fmt.Sprintf("00000000-0000-4000-8000-%012d", n) }

func TestLabellingFlow(t *testing.T) {
	e := newTestEnv(t)
	p := e.project()
	ids := e.drawnItems(p, 3)
	u := e.member(p)
	c := e.login(u)

	doc := page(t, c.get("/p/"+p.Slug+"/label"), http.StatusOK)
	if doc.Find("#label-data").Length() != 1 || doc.Find("script[src]").Length() != 1 {
		t.Fatalf("label page lacks its data block or script")
	}
	first := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/next", `{"exclude":[]}`), http.StatusOK)
	if first.Next == nil || first.Next.ID != ids[0] {
		t.Fatalf("first claim = %+v, want item %d", first.Next, ids[0])
	}
	// The tally comes only when asked for.
	if first.Tally != nil {
		t.Errorf("claim not asking for the tally got %+v", first.Tally)
	}
	again := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/next", `{"exclude":[],"tally":true}`), http.StatusOK)
	if again.Next == nil || again.Next.ID != ids[0] || again.Tally == nil || *again.Tally != (store.Tally{}) {
		t.Fatalf("claim asking for the tally = %+v, tally %+v; want item %d again and a zero tally", again.Next, again.Tally, ids[0])
	}
	// The image is served to the claimant and is the PNG stored.
	resp := c.get(first.Next.Image)
	body, _ := io.ReadAll(resp.Body)
	if resp.StatusCode != http.StatusOK || resp.Header.Get("Content-Type") != "image/png" || !bytes.HasPrefix(body, []byte("\x89PNG")) {
		t.Fatalf("image: %d %s, %d bytes", resp.StatusCode, resp.Header.Get("Content-Type"), len(body))
	}
	// Not an item the labeller neither holds nor voted on.
	if resp := c.get("/p/" + p.Slug + "/items/" + strconv.FormatInt(ids[2], 10) + "/image"); resp.StatusCode != http.StatusNotFound {
		t.Errorf("image of an unclaimed item: %d, want 404", resp.StatusCode)
	}

	// One vote id sent twice is stored once; both answers are success.
	body1 := voteBody(uuidN(1), ids[0], "glass")
	r1 := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/votes", body1), http.StatusOK)
	r2 := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/votes", body1), http.StatusOK)
	if r1.Repeat || !r2.Repeat {
		t.Errorf("repeat flags: first %v second %v, want false, true", r1.Repeat, r2.Repeat)
	}
	votes, err := e.store.VotesOfLabeller(context.Background(), p.ID, u.ID)
	if err != nil || len(votes) != 1 {
		t.Fatalf("votes stored = %d, %v; want 1", len(votes), err)
	}
	if r1.Tally == nil || r1.Tally.Votes != 1 || r1.Tally.Seconds != 1.5 {
		t.Errorf("tally after one vote = %+v", r1.Tally)
	}
	if r1.Next == nil || r1.Next.ID != ids[1] {
		t.Fatalf("next after the vote = %+v, want item %d", r1.Next, ids[1])
	}
	// A different second vote on the same item is refused.
	r3 := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/votes", voteBody(uuidN(2), ids[0], "pet-bottle")), http.StatusConflict)
	if r3.Error == "" {
		t.Error("conflict without a message")
	}
	// Bad input is named.
	r4 := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/votes", voteBody("not-a-uuid", ids[1], "glass")), http.StatusBadRequest)
	if !strings.HasPrefix(r4.Error, "id:") {
		t.Errorf("bad id error = %q", r4.Error)
	}
	apiResult(t, c.postJSON("/api/p/"+p.Slug+"/votes", voteBody(uuidN(3), ids[1], "no-such-label")), http.StatusBadRequest)

	// Undo gives the item back and the labeller can vote again.
	apiResult(t, c.postJSON("/api/p/"+p.Slug+"/votes", voteBody(uuidN(4), ids[1], "glass")), http.StatusOK)
	un := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/undo", `{}`), http.StatusOK)
	if un.Item == nil || un.Item.ID != ids[1] || un.Tally.Votes != 1 {
		t.Fatalf("undo = %+v (tally %+v), want item %d and 1 vote left", un.Item, un.Tally, ids[1])
	}
	apiResult(t, c.postJSON("/api/p/"+p.Slug+"/votes", voteBody(uuidN(5), ids[1], "pet-bottle")), http.StatusOK)

	// Skip gives the item back and hands out another.
	sk := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/skip", fmt.Sprintf(`{"item":%d,"exclude":[]}`, ids[2])), http.StatusOK)
	if sk.Next != nil {
		t.Errorf("skip of the last item handed out %+v, want nothing", sk.Next)
	}

	// A paused labeller is told why and cannot claim or vote.
	if err := e.store.SetMemberStatus(context.Background(), p.ID, u.ID, store.StatusPaused, "Please reread the guide."); err != nil {
		t.Fatal(err)
	}
	pr := apiResult(t, c.postJSON("/api/p/"+p.Slug+"/next", `{}`), http.StatusForbidden)
	if !strings.Contains(pr.Error, "paused") || !strings.Contains(pr.Error, "reread the guide") {
		t.Errorf("paused message = %q", pr.Error)
	}
}

func TestLabelNamesAreText(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	evil := `<script>alert("x")</script>`
	p, err := e.store.CreateProjectWithTaxonomy(ctx, store.Project{Slug: uniq("evil"), Name: `<b>Line</b>`}, []store.LabelInput{
		{Key: "glass", Name: evil, Description: `<img src=x onerror=alert(1)>`, Parent: -1},
		{Key: "metal", Parent: -1},
	})
	if err != nil {
		t.Fatal(err)
	}
	u := e.member(p)
	c := e.login(u)
	resp := c.get("/p/" + p.Slug + "/label")
	raw, _ := io.ReadAll(resp.Body)
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("label page: %d", resp.StatusCode)
	}
	if bytes.Contains(raw, []byte("<script>alert")) || bytes.Contains(raw, []byte("<img src=x")) || bytes.Contains(raw, []byte("<b>Line")) {
		t.Fatalf("markup from label or project names reached the page unescaped")
	}
	doc := page(t, &http.Response{StatusCode: 200, Body: io.NopCloser(bytes.NewReader(raw)), Request: resp.Request}, http.StatusOK)
	var data labelScreenData
	if err := json.Unmarshal([]byte(doc.Find("#label-data").Text()), &data); err != nil {
		t.Fatal(err)
	}
	if len(data.Labels) != 2 || data.Labels[0].Name != evil {
		t.Errorf("label data = %+v, want the name as plain text", data.Labels)
	}
	if got := doc.Find("title").Text(); !strings.Contains(got, "<b>Line</b>") {
		t.Errorf("title = %q, want the project name as text", got)
	}
}

func TestForgedPostRefused(t *testing.T) {
	e := newTestEnv(t)
	p := e.project()
	e.drawnItems(p, 1)
	c := e.login(e.member(p))
	for _, h := range []map[string]string{
		{"Sec-Fetch-Site": "cross-site"},
		{"Origin": "https://evil.example"},
	} {
		req, _ := http.NewRequest("POST", e.ts.URL+"/api/p/"+p.Slug+"/next", strings.NewReader(`{}`))
		req.Header.Set("Content-Type", "application/json")
		for k, v := range h {
			req.Header.Set(k, v)
		}
		resp, err := c.hc.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusForbidden {
			t.Errorf("POST with %v: %d, want 403", h, resp.StatusCode)
		}
	}
	n, _ := e.store.VoteTally(context.Background(), p.ID, 0, time.Time{})
	if n.Votes != 0 {
		t.Error("a forged request changed something")
	}
}

func TestImagesStayInTheStore(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	p := e.project()
	other := e.project()
	ids := e.drawnItems(p, 1)
	otherIDs := e.drawnItems(other, 1)
	lead := e.login(e.user(store.RoleLead))
	// An item whose stored key names a path is refused, not followed.
	var bad int64
	err := e.store.Pool().QueryRow(ctx, `
		INSERT INTO items (project_id, sha256, file_key, media_type, bytes, width, height)
		VALUES ($1, sha256('bad'::bytea), '../../../../etc/passwd', 'image/png', 1, 1, 1) RETURNING id`, p.ID).Scan(&bad)
	if err != nil {
		t.Fatal(err)
	}
	base := "/p/" + p.Slug + "/items/"
	for _, path := range []string{
		base + strconv.FormatInt(bad, 10) + "/image",
		base + "..%2F..%2F..%2Fetc%2Fpasswd/image",
		base + "%2e%2e/image",
		base + strconv.FormatInt(otherIDs[0], 10) + "/image", // another project's item under this slug
		base + "-1/thumb",
	} {
		if resp := lead.get(path); resp.StatusCode != http.StatusNotFound {
			b, _ := io.ReadAll(resp.Body)
			t.Errorf("GET %s: %d, want 404 (%.80s)", path, resp.StatusCode, b)
		}
	}
	if resp := lead.get(base + strconv.FormatInt(ids[0], 10) + "/thumb"); resp.StatusCode != http.StatusOK {
		t.Errorf("lead's thumbnail of a real item: %d", resp.StatusCode)
	}
}

// routePaths lists every route in routes.go, Route prefixes applied. The
// router is wrapped in the cross-origin guard, so chi.Walk cannot reach
// it; reading the one routes file covers new routes just as well.
func routePaths(t *testing.T) [][2]string {
	fset := token.NewFileSet()
	f, err := parser.ParseFile(fset, "routes.go", nil, 0)
	if err != nil {
		t.Fatal(err)
	}
	var out [][2]string
	var walk func(n ast.Node, prefix string)
	walk = func(n ast.Node, prefix string) {
		ast.Inspect(n, func(n ast.Node) bool {
			call, ok := n.(*ast.CallExpr)
			if !ok {
				return true
			}
			sel, ok := call.Fun.(*ast.SelectorExpr)
			if !ok || len(call.Args) == 0 {
				return true
			}
			lit, ok := call.Args[0].(*ast.BasicLit)
			if !ok || lit.Kind != token.STRING {
				return true
			}
			path, _ := strconv.Unquote(lit.Value)
			switch sel.Sel.Name {
			case "Route":
				if fn, ok := call.Args[1].(*ast.FuncLit); ok {
					walk(fn.Body, prefix+path)
				}
				return false
			case "Get", "Post", "Put", "Patch", "Delete":
				out = append(out, [2]string{strings.ToUpper(sel.Sel.Name), prefix + path})
			}
			return true
		})
	}
	walk(f, "")
	return out
}

func TestLabellerFencedOut(t *testing.T) {
	e := newTestEnv(t)
	mine := e.project()
	theirs := e.project()
	e.drawnItems(mine, 1)
	theirItem := e.drawnItems(theirs, 1)[0]
	u := e.member(mine)
	c := e.login(u)
	routes := routePaths(t)
	if len(routes) < 15 {
		t.Fatalf("found only %d routes in routes.go", len(routes))
	}
	checked := 0
	for _, rt := range routes {
		method, path := rt[0], rt[1]
		isLead := strings.HasPrefix(path, "/lead")
		hasProject := strings.Contains(path, "{project}")
		if !isLead && !hasProject {
			continue
		}
		r := strings.NewReplacer("{project}", theirs.Slug, "{item}", strconv.FormatInt(theirItem, 10),
			"{user}", strconv.FormatInt(u.ID, 10), "{release}", "1", "{token}", "x", "*", "x")
		for _, slug := range []string{theirs.Slug, mine.Slug} {
			if slug == mine.Slug && !isLead {
				continue // the labeller's own project is theirs to use
			}
			path := strings.NewReplacer("{project}", slug).Replace(path)
			path = r.Replace(path)
			path = regexpParam.ReplaceAllString(path, "1")
			var resp *http.Response
			if method == "GET" {
				resp = c.get(path)
			} else {
				req, _ := http.NewRequest(method, e.ts.URL+path, strings.NewReader(`{}`))
				req.Header.Set("Content-Type", "application/json")
				resp = c.do(req)
			}
			checked++
			if resp.StatusCode != http.StatusForbidden && resp.StatusCode != http.StatusNotFound {
				t.Errorf("labeller %s %s: %d, want 403 or 404", method, path, resp.StatusCode)
			}
		}
	}
	if checked < 10 {
		t.Errorf("only %d fenced routes checked", checked)
	}
}

// regexpParam fills URL parameters the replacer does not know.
var regexpParam = regexp.MustCompile(`\{[a-z]+\}`)

// TestLabelPageWeight keeps the labelling screen light: the page and the
// files it loads, without the image, stay under 60 KB.
func TestLabelPageWeight(t *testing.T) {
	e := newTestEnv(t)
	p := e.project()
	c := e.login(e.member(p))
	resp := c.get("/p/" + p.Slug + "/label")
	b, _ := io.ReadAll(resp.Body)
	total := len(b)
	doc := page(t, &http.Response{StatusCode: resp.StatusCode, Body: io.NopCloser(bytes.NewReader(b)), Request: resp.Request}, http.StatusOK)
	var assets []string
	doc.Find("link[rel=stylesheet], script[src]").Each(func(_ int, s *goquery.Selection) {
		assets = append(assets, s.AttrOr("href", s.AttrOr("src", "")))
	})
	if len(assets) != 3 {
		t.Errorf("page loads %v, want two style sheets and one script", assets)
	}
	for _, a := range assets {
		r := c.get(a)
		n, _ := io.Copy(io.Discard, r.Body)
		if r.StatusCode != http.StatusOK {
			t.Errorf("%s: %d", a, r.StatusCode)
		}
		total += int(n)
	}
	if total >= 60<<10 {
		t.Errorf("labelling page weighs %d bytes without the image, want under 60 KB", total)
	}
	t.Logf("labelling page: %d bytes with its scripts and styles", total)
}
