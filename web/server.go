// Package web is Concord's HTTP surface: the labelling screen for labellers,
// the lead pages, and the health endpoints. Pages are server-rendered templ
// components with a small vanilla script; all data goes through the store,
// statistics through agreement, label trees through taxonomy. web never
// writes SQL.
package web

import (
	"bytes"
	"context"
	"log/slog"
	"net/http"
	"path/filepath"
	"time"

	"github.com/a-h/templ"

	"github.com/concord-labs/concord/store"
)

// Config is what the web app needs from flags and environment.
type Config struct {
	// SecureCookies marks cookies Secure. Set it when served over TLS
	// (directly or behind a TLS-terminating proxy).
	SecureCookies bool
	// SessionTTL is how long a login lasts.
	SessionTTL time.Duration
	// BaseURL is the public address, used in invite links ("" = from the request).
	BaseURL string
	// DataDir holds the image store (originals and thumbnails).
	DataDir string
	// ImportRoot is the only server folder the lead pages may import
	// images from ("" = DataDir/import).
	ImportRoot string
	// EngineInterval and EngineVotes set when the refit loop refits a
	// project: once both this much time and this many new votes have
	// passed (zero = the defaults, 5 s and 200 votes).
	EngineInterval time.Duration
	EngineVotes    int64
}

// Server holds everything the handlers need.
type Server struct {
	store  *store.Store
	log    *slog.Logger
	cfg    Config
	now    func() time.Time
	assets *assets
	eng    *engine
}

// New builds a Server. log may be nil (logs are then discarded).
func New(s *store.Store, log *slog.Logger, cfg Config) *Server {
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	if cfg.SessionTTL == 0 {
		cfg.SessionTTL = 12 * time.Hour
	}
	if cfg.ImportRoot == "" {
		cfg.ImportRoot = filepath.Join(cfg.DataDir, "import")
	}
	return &Server{store: s, log: log, cfg: cfg, now: time.Now, assets: staticAssets,
		eng: newEngine(cfg.EngineInterval, cfg.EngineVotes)}
}

// render writes a component into a buffer first, so a failed render becomes
// a clean 500 instead of half a page.
func (s *Server) render(w http.ResponseWriter, r *http.Request, status int, c templ.Component) error {
	var buf bytes.Buffer
	if err := c.Render(r.Context(), &buf); err != nil {
		return err
	}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.WriteHeader(status)
	_, err := w.Write(buf.Bytes())
	return err
}

func (s *Server) healthz(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	w.Write([]byte("ok\n"))
}

func (s *Server) readyz(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := context.WithTimeout(r.Context(), 2*time.Second)
	defer cancel()
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	if err := s.store.Ping(ctx); err != nil {
		s.log.Warn("readyz: database does not answer", "err", err)
		w.WriteHeader(http.StatusServiceUnavailable)
		w.Write([]byte("database unavailable\n"))
		return
	}
	w.Write([]byte("ready\n"))
}
