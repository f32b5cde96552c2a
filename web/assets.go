package web

import (
	"crypto/sha256"
	"embed"
	"encoding/hex"
	"io/fs"
	"mime"
	"net/http"
	"path"
	"strings"

	"github.com/go-chi/chi/v5"
)

//go:embed static
var staticFS embed.FS

// assets serves the embedded static files under /static/{version}/name,
// where version is a hash of all of them, so browsers may cache them for a
// year and still get a new file after each release.
type assets struct {
	version string
	files   map[string][]byte
}

func loadAssets() *assets {
	a := &assets{files: map[string][]byte{}}
	h := sha256.New()
	fs.WalkDir(staticFS, "static", func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := staticFS.ReadFile(p)
		if err != nil {
			return err
		}
		name := strings.TrimPrefix(p, "static/")
		a.files[name] = b
		h.Write([]byte(name))
		h.Write(b)
		return nil
	})
	a.version = hex.EncodeToString(h.Sum(nil))[:12]
	return a
}

// URL returns the cache-busting address of a static file.
func (a *assets) URL(name string) string { return "/static/" + a.version + "/" + name }

func (a *assets) serve(w http.ResponseWriter, r *http.Request) {
	name := chi.URLParam(r, "*")
	b, ok := a.files[name]
	if !ok {
		http.NotFound(w, r)
		return
	}
	if ct := mime.TypeByExtension(path.Ext(name)); ct != "" {
		w.Header().Set("Content-Type", ct)
	}
	if chi.URLParam(r, "version") == a.version {
		w.Header().Set("Cache-Control", "public, max-age=31536000, immutable")
	} else {
		w.Header().Set("Cache-Control", "no-cache")
	}
	w.Write(b)
}

// staticAssets is computed once from the embedded files; it never changes
// while the program runs.
var staticAssets = loadAssets()

// asset is the URL of a static file, for templates.
func asset(name string) string { return staticAssets.URL(name) }
