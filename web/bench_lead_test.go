package web

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/concord-labs/concord/store"
)

// BenchmarkLeadPages loads a project with 100,000 items and 1,000,000
// votes (bulk COPY), fits it once with the engine, then times the
// server-side render of each lead page.
//
//	go test -run '^$' -bench BenchmarkLeadPages -benchtime 20x ./web/
func BenchmarkLeadPages(b *testing.B) {
	if testing.Short() {
		b.Skip("loads 1,000,000 votes; skipped under -short")
	}
	const nItems, nLabellers, votesPerItem = 100_000, 200, 10
	ctx := context.Background()
	st := testDB.Open(b)
	srv := New(st, nil, Config{DataDir: b.TempDir()})
	p, err := st.CreateProjectWithTaxonomy(ctx, store.Project{Slug: uniq("bench"), Name: "Sorting line, 1M votes"}, []store.LabelInput{
		{Key: "material", Parent: -1},
		{Key: "plastic", Parent: 0}, {Key: "pet-bottle", Parent: 1}, {Key: "plastic-film", Parent: 1},
		{Key: "metal", Parent: 0}, {Key: "aluminium-can", Parent: 4}, {Key: "steel-can", Parent: 4},
		{Key: "paper", Parent: 0}, {Key: "cardboard", Parent: 7}, {Key: "newspaper", Parent: 7},
		{Key: "glass", Parent: -1}, {Key: "residual-waste", Parent: -1},
	})
	if err != nil {
		b.Fatal(err)
	}
	labels, _ := st.Labels(ctx, p.ID)
	var leaves []int64
	for _, l := range labels {
		if l.IsLeaf {
			leaves = append(leaves, l.ID)
		}
	}
	hash, _ := HashPassword(testPassword)
	lead, err := st.CreateUser(ctx, store.User{Login: uniq("benchlead"), DisplayName: "Lead", Role: store.RoleLead, PasswordHash: hash})
	if err != nil {
		b.Fatal(err)
	}
	users := make([]int64, nLabellers)
	for i := range users {
		u, err := st.CreateUser(ctx, store.User{Login: uniq("benchlab"), DisplayName: "Labeller", Role: store.RoleLabeller})
		if err != nil {
			b.Fatal(err)
		}
		users[i] = u.ID
		st.AddMember(ctx, p.ID, u.ID)
	}

	start := time.Now()
	rng := rand.New(rand.NewPCG(1, 2))
	itemRows := make([][]any, nItems)
	for i := range itemRows {
		var seed [8]byte
		binary.LittleEndian.PutUint64(seed[:], uint64(i))
		sum := sha256.Sum256(append([]byte(p.Slug), seed[:]...))
		itemRows[i] = []any{p.ID, sum[:], hex.EncodeToString(sum[:]), fmt.Sprintf("belt-%06d.jpg", i), "image/jpeg", int64(50_000), int32(640), int32(480)}
	}
	if _, err := st.Pool().CopyFrom(ctx, pgx.Identifier{"items"},
		[]string{"project_id", "sha256", "file_key", "original_name", "media_type", "bytes", "width", "height"},
		pgx.CopyFromRows(itemRows)); err != nil {
		b.Fatal(err)
	}
	ids, err := collectItemIDs(ctx, st, p.ID)
	if err != nil {
		b.Fatal(err)
	}
	now := time.Now()
	voteRows := make([][]any, 0, nItems*votesPerItem)
	for _, id := range ids {
		truth := leaves[rng.IntN(len(leaves))]
		first := rng.IntN(nLabellers)
		for k := range votesPerItem {
			label := truth
			if rng.Float64() < 0.2 {
				label = leaves[rng.IntN(len(leaves))]
			}
			at := now.Add(-time.Duration(rng.Int64N(int64(30 * 24 * time.Hour))))
			var vid [16]byte
			binary.LittleEndian.PutUint64(vid[:8], rng.Uint64())
			binary.LittleEndian.PutUint64(vid[8:], rng.Uint64())
			voteRows = append(voteRows, []any{vid, p.ID, id, users[(first+k*7)%nLabellers], label, float32(2 + rng.Float64()*8), at})
		}
	}
	if _, err := st.Pool().CopyFrom(ctx, pgx.Identifier{"votes"},
		[]string{"id", "project_id", "item_id", "labeller_id", "label_id", "seconds", "created_at"},
		pgx.CopyFromRows(voteRows)); err != nil {
		b.Fatal(err)
	}
	if _, err := st.Pool().Exec(ctx, `
		UPDATE items SET vote_count = 10, votes_needed = 0, status = CASE WHEN id % 50 = 0 THEN 'review' ELSE 'done' END
		WHERE project_id = $1 AND id % 10 <> 0;
		`, p.ID); err != nil {
		b.Fatal(err)
	}
	st.Pool().Exec(ctx, `UPDATE items SET vote_count = 10, votes_needed = 2, status = 'needs_votes' WHERE project_id = $1 AND id % 10 = 0`, p.ID)
	// Autovacuum would do this on a live server; without it a fresh COPY
	// has no visibility map and index-only scans fall back to the heap.
	st.Pool().Exec(ctx, `VACUUM ANALYZE items`)
	st.Pool().Exec(ctx, `VACUUM ANALYZE votes`)
	b.Logf("loaded %d items and %d votes in %v", nItems, len(voteRows), time.Since(start))
	fit := time.Now()
	if err := srv.RefitProject(ctx, p.ID); err != nil {
		b.Fatal(err)
	}
	st.Pool().Exec(ctx, `VACUUM ANALYZE consensus`)
	st.Pool().Exec(ctx, `VACUUM ANALYZE items`)
	b.Logf("engine fit in %v", time.Since(fit))

	token, th := newToken()
	if err := st.CreateSession(ctx, th, lead.ID, time.Now().Add(time.Hour)); err != nil {
		b.Fatal(err)
	}
	h := srv.Handler()
	base := "/lead/p/" + p.Slug
	pages := []struct{ name, path string }{
		{"projects", "/lead/projects"},
		{"setup", base + "/setup"},
		{"progress", base + "/progress"},
		{"agreement", base + "/agreement"},
		{"labellers", base + "/labellers"},
		{"labeller", base + "/labellers/" + i64(users[0])},
		{"items", base + "/items"},
		{"items-disputed", base + "/items?disputed=on&label=glass"},
		{"item", base + "/items/" + i64(ids[len(ids)/2])},
		{"cost", base + "/cost"},
		{"releases", base + "/releases"},
	}
	for _, pg := range pages {
		b.Run(pg.name, func(b *testing.B) {
			for b.Loop() {
				req := httptest.NewRequest("GET", pg.path, nil)
				req.AddCookie(&http.Cookie{Name: sessionCookie, Value: token})
				rec := httptest.NewRecorder()
				h.ServeHTTP(rec, req)
				if rec.Code != http.StatusOK {
					b.Fatalf("%s: %d", pg.path, rec.Code)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Microseconds())/1000/float64(b.N), "ms/page")
		})
	}
}

func collectItemIDs(ctx context.Context, st *store.Store, projectID int64) ([]int64, error) {
	rows, err := st.Pool().Query(ctx, `SELECT id FROM items WHERE project_id = $1 ORDER BY id`, projectID)
	if err != nil {
		return nil, err
	}
	return pgx.CollectRows(rows, pgx.RowTo[int64])
}
