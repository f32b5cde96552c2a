package web

import (
	"bytes"
	"context"
	"fmt"
	"mime/multipart"
	"net/http"
	"net/url"
	"strings"
	"testing"

	"github.com/PuerkitoBio/goquery"

	"github.com/concord-labs/concord/store"
)

// multipartFile is one file part of a test upload.
type multipartFile struct {
	field, name string
	body        []byte
}

func (c *client) postMultipart(path string, fields url.Values, files ...multipartFile) *http.Response {
	c.t.Helper()
	var buf bytes.Buffer
	mw := multipart.NewWriter(&buf)
	for k, vs := range fields {
		for _, v := range vs {
			mw.WriteField(k, v)
		}
	}
	for _, f := range files {
		w, err := mw.CreateFormFile(f.field, f.name)
		if err != nil {
			c.t.Fatal(err)
		}
		w.Write(f.body)
	}
	mw.Close()
	req, _ := http.NewRequest("POST", c.base+path, &buf)
	req.Header.Set("Content-Type", mw.FormDataContentType())
	return c.do(req)
}

func text(doc *goquery.Document, sel string) string {
	return strings.TrimSpace(doc.Find(sel).First().Text())
}

func TestCreateProject(t *testing.T) {
	e := newTestEnv(t)
	lead := e.login(e.user(store.RoleLead))
	doc := page(t, lead.get("/lead/projects/new"), http.StatusOK)
	if doc.Find(`form[action="/lead/projects"] input[name=slug]`).Length() != 1 {
		t.Fatal("no slug field on the new project form")
	}
	doc = page(t, lead.postForm("/lead/projects", url.Values{"slug": {"Bad Slug"}, "name": {""}}), http.StatusUnprocessableEntity)
	if got := text(doc, "#err-slug"); !strings.HasPrefix(got, "Slug:") {
		t.Errorf("slug error = %q", got)
	}
	if got := text(doc, "#err-name"); !strings.HasPrefix(got, "Name:") {
		t.Errorf("name error = %q", got)
	}
	slug := uniq("belt")
	resp := lead.postForm("/lead/projects", url.Values{"slug": {slug}, "name": {"Belt camera 2"}, "description": {"Line 2"}})
	if resp.StatusCode != http.StatusSeeOther || resp.Header.Get("Location") != "/lead/p/"+slug+"/setup" {
		t.Fatalf("create: %d to %q", resp.StatusCode, resp.Header.Get("Location"))
	}
	doc = page(t, lead.postForm("/lead/projects", url.Values{"slug": {slug}, "name": {"Again"}}), http.StatusUnprocessableEntity)
	if got := text(doc, "#err-slug"); got != "Slug: a project with this slug exists already." {
		t.Errorf("duplicate slug error = %q", got)
	}
	doc = page(t, lead.get("/lead/projects"), http.StatusOK)
	row := doc.Find("table.projects tr").FilterFunction(func(_ int, s *goquery.Selection) bool {
		return strings.TrimSpace(s.Find("td").Eq(1).Text()) == slug
	})
	if row.Length() != 1 || strings.TrimSpace(row.Find("td").Eq(3).Text()) != "0" {
		t.Errorf("project list row for %s: %q", slug, row.Text())
	}
}

func TestSetupTaxonomy(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	p, err := e.store.CreateProject(ctx, store.Project{Slug: uniq("tax"), Name: "Taxonomy"})
	if err != nil {
		t.Fatal(err)
	}
	lead := e.login(e.user(store.RoleLead))
	base := "/lead/p/" + p.Slug + "/setup"
	bad := "material | Material\n  plastic | Plastic\n  plastic | Again\nBad Key! | x\n"
	doc := page(t, lead.postMultipart(base+"/taxonomy", url.Values{"taxonomy": {bad}}), http.StatusUnprocessableEntity)
	var problems []string
	doc.Find("#taxonomy .problems li").Each(func(_ int, s *goquery.Selection) { problems = append(problems, s.Text()) })
	if len(problems) < 2 || !strings.Contains(problems[0], "line 3") || !strings.Contains(problems[1], "line 4") {
		t.Errorf("problems = %q, want line 3 (duplicate key) and line 4 (bad key)", problems)
	}
	if got := doc.Find("#taxonomy textarea").Text(); got != bad {
		t.Errorf("textarea lost the pasted text: %q", got)
	}
	if labels, _ := e.store.Labels(ctx, p.ID); len(labels) != 0 {
		t.Errorf("%d labels stored from an invalid file", len(labels))
	}
	good := "material | Material\n  plastic | Plastic\n    pet-bottle | PET bottle\n  metal | Metal\n    aluminium-can | Aluminium can\nglass | Glass\n"
	resp := lead.postMultipart(base+"/taxonomy", nil, multipartFile{"taxonomy_file", "recycling.txt", []byte(good)})
	if resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("good taxonomy: %d", resp.StatusCode)
	}
	labels, _ := e.store.Labels(ctx, p.ID)
	if len(labels) != 6 || labels[2].Key != "pet-bottle" || labels[2].Depth != 2 {
		t.Errorf("stored labels = %+v", labels)
	}
	doc = page(t, lead.get(resp.Header.Get("Location")), http.StatusOK)
	if text(doc, "#taxonomy .saved") != "Taxonomy saved." || !strings.Contains(doc.Find("#taxonomy textarea").Text(), "pet-bottle") {
		t.Errorf("after save: %q", doc.Find("#taxonomy").Text())
	}
}

func TestSetupPolicyAndPay(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	p := e.project()
	lead := e.login(e.user(store.RoleLead))
	base := "/lead/p/" + p.Slug + "/setup"
	policy := url.Values{"min_votes": {"4"}, "max_votes": {"3"}, "confidence_target": {"1.5"}, "gold_rate": {"0.1"},
		"claim_seconds": {"abc"}, "accuracy_floor": {"0.7"}}
	doc := page(t, lead.postForm(base+"/policy", policy), http.StatusUnprocessableEntity)
	for field, want := range map[string]string{
		"max_votes":         "Maximum votes: must be at least the minimum votes.",
		"confidence_target": "Confidence target: must be between 0.5 and 0.999.",
		"claim_seconds":     `Claim lifetime: "abc" is not a whole number.`,
	} {
		if got := text(doc, "#err-"+field); got != want {
			t.Errorf("%s error = %q, want %q", field, got, want)
		}
	}
	if got := doc.Find(`input[name=claim_seconds]`).AttrOr("value", ""); got != "abc" {
		t.Errorf("rejected form lost its value: %q", got)
	}
	policy.Set("max_votes", "9")
	policy.Set("confidence_target", "0.9")
	policy.Set("claim_seconds", "120")
	policy.Set("gold_feedback", "on")
	if resp := lead.postForm(base+"/policy", policy); resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("good policy: %d", resp.StatusCode)
	}
	got, _ := e.store.ProjectByID(ctx, p.ID)
	want := store.VotePolicy{MinVotes: 4, MaxVotes: 9, ConfidenceTarget: 0.9, GoldRate: 0.1, ClaimSeconds: 120, AccuracyFloor: 0.7, GoldFeedback: true}
	if got.Policy != want {
		t.Errorf("policy = %+v, want %+v", got.Policy, want)
	}

	pay := url.Values{"pay_model": {"per_hour"}, "pay_rate": {"-1"}, "currency": {"euro"}, "budget_cap": {""}, "min_hourly_pay": {"12.5"}}
	doc = page(t, lead.postForm(base+"/pay", pay), http.StatusUnprocessableEntity)
	if !strings.HasPrefix(text(doc, "#err-pay_rate"), "Rate:") || !strings.HasPrefix(text(doc, "#err-currency"), "Currency:") {
		t.Errorf("pay errors: %q / %q", text(doc, "#err-pay_rate"), text(doc, "#err-currency"))
	}
	pay.Set("pay_rate", "14")
	pay.Set("currency", "eur")
	if resp := lead.postForm(base+"/pay", pay); resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("good pay: %d", resp.StatusCode)
	}
	got, _ = e.store.ProjectByID(ctx, p.ID)
	if got.Pay.Model != "per_hour" || got.Pay.Rate != 14 || got.Pay.Currency != "EUR" || got.Pay.BudgetCap != nil || *got.Pay.MinHourlyPay != 12.5 {
		t.Errorf("pay = %+v", got.Pay)
	}
}

func TestSetupGold(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	p := e.project()
	ids := e.items(p, 3)
	lead := e.login(e.user(store.RoleLead))
	path := "/lead/p/" + p.Slug + "/setup/gold"
	bad := fmt.Sprintf("item,label\n%d,glass\nbelt-1.jpg,plastic\n", ids[0])
	doc := page(t, lead.postMultipart(path, nil, multipartFile{"gold", "gold.csv", []byte(bad)}), http.StatusUnprocessableEntity)
	if got := text(doc, "#gold .problem"); !strings.HasPrefix(got, "gold.csv: line 3, label:") {
		t.Errorf("error = %q, want line 3, label", got)
	}
	if g, _ := e.store.GoldLabels(ctx, p.ID); len(g) != 0 {
		t.Errorf("a failed import stored %d answers", len(g))
	}
	good := fmt.Sprintf("item,label\n%d,glass\nbelt-1.jpg,pet-bottle\n", ids[0])
	if resp := lead.postMultipart(path, nil, multipartFile{"gold", "gold.csv", []byte(good)}); resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("good gold: %d", resp.StatusCode)
	}
	g, _ := e.store.GoldLabels(ctx, p.ID)
	labels := e.labelIDs(p)
	if len(g) != 2 || g[ids[0]] != labels["glass"] || g[ids[1]] != labels["pet-bottle"] {
		t.Errorf("gold = %v", g)
	}
}

func TestParseGoldCSV(t *testing.T) {
	for _, tc := range []struct {
		in, err string
		n       int
	}{
		{"item,label\n1,glass\n\nbelt.jpg, pet-bottle\n", "", 2},
		{"1,glass\n", "", 1},
		{"item,label\n1,glass,extra\n", "line 2, csv: want 2 fields (item,label), found 3", 0},
		{"item,label\n,glass\n", "line 2, item: empty", 0},
		{"item,label\n7,\n", "line 2, label: empty", 0},
		{"item,label\n", "line 1, csv: no answers in the file", 0},
		{"item,label\n\"1,glass\n", "line 2, csv:", 0},
	} {
		got, err := parseGoldCSV(strings.NewReader(tc.in))
		switch {
		case tc.err == "" && (err != nil || len(got) != tc.n):
			t.Errorf("%q: %d rows, %v; want %d", tc.in, len(got), err, tc.n)
		case tc.err != "" && (err == nil || !strings.HasPrefix(err.Error(), tc.err)):
			t.Errorf("%q: error %v, want %q", tc.in, err, tc.err)
		}
	}
}

func FuzzGoldCSV(f *testing.F) {
	f.Add("item,label\n1,glass\nbelt-0007.jpg,pet-bottle\n")
	f.Add("\"a\"\"b\",c\n")
	f.Add("x\n,\n")
	f.Fuzz(func(t *testing.T, in string) {
		rows, err := parseGoldCSV(strings.NewReader(in))
		if err != nil {
			ge, ok := err.(*goldError)
			if !ok || ge.Line < 1 || ge.Field == "" {
				t.Fatalf("error without line and field: %#v", err)
			}
			return
		}
		last := 0
		for _, r := range rows {
			if r.In.Item == "" || r.In.Label == "" || r.Line <= last {
				t.Fatalf("bad row %+v after line %d", r, last)
			}
			last = r.Line
		}
	})
}

// items adds n items named belt-<i>.jpg to p and returns their ids.
func (e *testEnv) items(p store.Project, n int) []int64 {
	e.t.Helper()
	var in []store.NewItem
	for i := range n {
		name := fmt.Sprintf("belt-%d.jpg", i)
		var sum [32]byte
		copy(sum[:], fmt.Sprintf("%-32s", p.Slug+name))
		in = append(in, store.NewItem{SHA256: sum, FileKey: fmt.Sprintf("%064x", i+1), OriginalName: name,
			MediaType: "image/jpeg", Bytes: 10, Width: 4, Height: 4})
	}
	got, err := e.store.InsertItems(context.Background(), p.ID, in)
	if err != nil {
		e.t.Fatal(err)
	}
	ids := make([]int64, n)
	for i, it := range in {
		ids[i] = got[it.SHA256]
	}
	return ids
}

func (e *testEnv) labelIDs(p store.Project) map[string]int64 {
	e.t.Helper()
	labels, err := e.store.Labels(context.Background(), p.ID)
	if err != nil {
		e.t.Fatal(err)
	}
	out := map[string]int64{}
	for _, l := range labels {
		out[l.Key] = l.ID
	}
	return out
}

// TestLabellerPageLargeTaxonomy: with more labels than a labeller's
// matrix is kept for, the labeller page says so instead of promising one
// at the next fit.
func TestLabellerPageLargeTaxonomy(t *testing.T) {
	e := newTestEnv(t)
	var in []store.LabelInput
	for i := range maxModelClasses + 6 {
		in = append(in, store.LabelInput{Key: fmt.Sprintf("part-%02d", i), Parent: -1})
	}
	p, err := e.store.CreateProjectWithTaxonomy(context.Background(), store.Project{Slug: uniq("wide"), Name: "Wide line"}, in)
	if err != nil {
		t.Fatal(err)
	}
	u := e.member(p)
	c := e.login(e.user(store.RoleLead))
	doc := page(t, c.get("/lead/p/"+p.Slug+"/labellers/"+i64(u.ID)), http.StatusOK)
	text := doc.Find("main").Text()
	if want := fmt.Sprintf("this project has %d labels", maxModelClasses+6); !strings.Contains(text, want) {
		t.Errorf("labeller page lacks %q", want)
	}
	if strings.Contains(text, "at its next fit") {
		t.Error("labeller page promises a matrix the engine will not keep")
	}
}
