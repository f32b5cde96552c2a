package web

import (
	"bytes"
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"net/http"
	"net/url"
	"strings"
	"testing"

	"github.com/concord-labs/concord/store"
)

// beltFrame draws a small distinct PNG standing in for a camera frame.
func beltFrame(t *testing.T, i int) []byte {
	img := image.NewRGBA(image.Rect(0, 0, 32, 24))
	for y := range 24 {
		for x := range 32 {
			img.Set(x, y, color.RGBA{uint8(i * 40), uint8(x * 8), uint8(y * 10 * (i + 1)), 255})
		}
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// TestLeadEmptyProjectToRunningJob walks a lead from nothing to a labeller
// holding an item, through the web pages only.
func TestLeadEmptyProjectToRunningJob(t *testing.T) {
	e := newTestEnv(t)
	lead := e.login(e.user(store.RoleLead))
	slug := uniq("flow")
	if resp := lead.postForm("/lead/projects", url.Values{"slug": {slug}, "name": {"Line 3 camera"}}); resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("create project: %d", resp.StatusCode)
	}
	base := "/lead/p/" + slug + "/setup"
	tax := "material\n  plastic\n    pet-bottle | PET bottle\n  metal\n    aluminium-can | Aluminium can\nglass\nresidual-waste | Residual waste\n"
	if resp := lead.postMultipart(base+"/taxonomy", url.Values{"taxonomy": {tax}}); resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("taxonomy: %d", resp.StatusCode)
	}
	var files []multipartFile
	for i := range 4 {
		files = append(files, multipartFile{"images", fmt.Sprintf("frame-%d.png", i), beltFrame(t, i)})
	}
	files = append(files, multipartFile{"images", "notes.txt", []byte("not an image")})
	doc := page(t, lead.postMultipart(base+"/images", nil, files...), http.StatusOK)
	if got := text(doc, "#images .saved p"); !strings.HasPrefix(got, "Imported 4 new images of 5 files") {
		t.Errorf("import report = %q", got)
	}
	policy := url.Values{"min_votes": {"2"}, "max_votes": {"5"}, "confidence_target": {"0.9"}, "gold_rate": {"0"},
		"claim_seconds": {"300"}, "accuracy_floor": {"0.6"}}
	if resp := lead.postForm(base+"/policy", policy); resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("policy: %d", resp.StatusCode)
	}
	req, _ := http.NewRequest("POST", lead.base+"/p/"+slug+"/invites", nil)
	req.Header.Set("Accept", "application/json")
	resp := lead.do(req)
	var inv struct{ Link string }
	if err := json.NewDecoder(resp.Body).Decode(&inv); err != nil || resp.StatusCode != http.StatusCreated {
		t.Fatalf("invite: %d, %v", resp.StatusCode, err)
	}
	path := strings.TrimPrefix(inv.Link, e.ts.URL)
	labeller := e.client()
	resp = labeller.postForm(path, url.Values{"login": {uniq("sorter")}, "display_name": {"Sorter"},
		"password": {testPassword}, "password2": {testPassword}})
	if resp.StatusCode != http.StatusSeeOther {
		b, _ := io.ReadAll(resp.Body)
		t.Fatalf("accept invite: %d %.300s", resp.StatusCode, b)
	}
	resp = labeller.postJSON("/api/p/"+slug+"/next", `{}`)
	var got struct {
		Next *struct{ ID int64 } `json:"next"`
	}
	if err := json.NewDecoder(resp.Body).Decode(&got); err != nil || resp.StatusCode != http.StatusOK || got.Next == nil || got.Next.ID == 0 {
		t.Fatalf("labeller gets no item: %d %+v %v", resp.StatusCode, got, err)
	}
	// The lead's setup page lists the used invite.
	doc = page(t, lead.get(base), http.StatusOK)
	if doc.Find("#invite tbody tr").Length() != 1 {
		t.Errorf("invites listed: %d", doc.Find("#invite tbody tr").Length())
	}
}
