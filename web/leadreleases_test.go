package web

import (
	"archive/tar"
	"compress/gzip"
	"context"
	"crypto/sha256"
	"io"
	"net/http"
	"net/url"
	"strings"
	"testing"

	"github.com/concord-labs/concord/store"
)

// TestDownloadRecordedRelease: a release downloaded after the project moved
// on (labels flipped, items added) has every file first issued, its
// manifest with the recorded SHA-256; an altered record is refused.
func TestDownloadRecordedRelease(t *testing.T) {
	e := newTestEnv(t)
	ctx := context.Background()
	lead := e.login(e.user(store.RoleLead))
	p := e.project()
	labels := e.labelIDs(p)
	consensus := func(label string) {
		t.Helper()
		_, err := e.store.Pool().Exec(ctx, `
			INSERT INTO consensus (item_id, project_id, label_id, confidence, method, vote_count)
			SELECT id, project_id, $2, 0.99, 'ds', 3 FROM items WHERE project_id = $1
			ON CONFLICT (item_id) DO UPDATE SET label_id = excluded.label_id`, p.ID, labels[label])
		if err != nil {
			t.Fatal(err)
		}
	}
	e.items(p, 12)
	consensus("pet-bottle")
	base := "/lead/p/" + p.Slug + "/releases"
	resp := lead.postForm(base, url.Values{"name": {"r1"}, "split": {"80/10/10"}, "level": {"leaf"},
		"format": {"jsonl,csv"}, "min_confidence": {"0.95"}, "seed": {"5"}})
	if resp.StatusCode != http.StatusSeeOther {
		t.Fatalf("create release: %d", resp.StatusCode)
	}
	rec, err := e.store.ReleaseByName(ctx, p.ID, "r1")
	if err != nil || rec.ItemCount != 12 {
		t.Fatalf("recorded %+v, %v", rec, err)
	}
	first := downloadedFiles(t, lead.get(base+"/r1/download"))
	if sum := sha256.Sum256(first["r1/manifest.jsonl"]); sum != rec.ManifestSHA256 {
		t.Fatalf("manifest SHA-256 %x, recorded %x", sum, rec.ManifestSHA256)
	}

	// Every item is glass now, and six more arrived: a rebuild from today's
	// data would differ in every line.
	if n := len(e.items(p, 18)); n != 18 {
		t.Fatalf("%d items", n)
	}
	consensus("glass")
	later := downloadedFiles(t, lead.get(base+"/r1/download"))
	// Every file, release.json and SHA256SUMS included, is as first issued.
	if len(first) != 5 || len(later) != len(first) {
		t.Errorf("%d files later, %d first, want 5", len(later), len(first))
	}
	for _, name := range []string{"r1/manifest.jsonl", "r1/manifest.csv", "r1/release.json", "r1/CARD.md", "r1/SHA256SUMS"} {
		if len(first[name]) == 0 || string(later[name]) != string(first[name]) {
			t.Errorf("%s changed after the project moved on (%d vs %d bytes)", name, len(first[name]), len(later[name]))
		}
	}
	if string(later["r1/release.json"]) != string(rec.ReleaseJSON) || strings.Contains(string(rec.ReleaseJSON), `"reissued"`) {
		t.Errorf("downloaded release.json is not the recorded one:\n%s", later["r1/release.json"])
	}
	if sum := sha256.Sum256(later["r1/manifest.jsonl"]); sum != rec.ManifestSHA256 {
		t.Errorf("later manifest SHA-256 %x, recorded %x", sum, rec.ManifestSHA256)
	}

	// A row altered behind the immutability trigger's back is refused.
	tx, err := e.store.Pool().Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback(ctx)
	if _, err := tx.Exec(ctx, `SET LOCAL session_replication_role = replica`); err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, `UPDATE release_items SET confidence = 0.5 WHERE release_id = $1`, rec.ID); err != nil {
		t.Fatal(err)
	}
	if err := tx.Commit(ctx); err != nil {
		t.Fatal(err)
	}
	doc := page(t, lead.get(base+"/r1/download"), http.StatusInternalServerError)
	if got := doc.Find("main").Text(); !strings.Contains(got, "altered") || !strings.Contains(got, "checksum") {
		t.Errorf("altered release page says %q", got)
	}
	page(t, lead.get(base+"/r9/download"), http.StatusNotFound)
}

// downloadedFiles reads a .tar.gz answer into a map of path to contents.
func downloadedFiles(t *testing.T, resp *http.Response) map[string][]byte {
	t.Helper()
	if resp.StatusCode != http.StatusOK || resp.Header.Get("Content-Type") != "application/gzip" {
		t.Fatalf("download: %d %s", resp.StatusCode, resp.Header.Get("Content-Type"))
	}
	gz, err := gzip.NewReader(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	tr := tar.NewReader(gz)
	out := map[string][]byte{}
	for {
		h, err := tr.Next()
		if err == io.EOF {
			return out
		}
		if err != nil {
			t.Fatal(err)
		}
		if out[h.Name], err = io.ReadAll(tr); err != nil {
			t.Fatal(err)
		}
	}
}
