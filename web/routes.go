package web

import (
	"net/http"
	"time"

	"github.com/go-chi/chi/v5"
	"github.com/go-chi/chi/v5/middleware"
)

// Handler returns the whole HTTP surface. Every route is listed here.
func (s *Server) Handler() http.Handler {
	r := chi.NewRouter()
	r.Use(middleware.RealIP)
	r.Use(middleware.Recoverer)
	r.Use(s.logRequests)
	r.Use(securityHeaders)

	r.Get("/healthz", s.healthz)
	r.Get("/readyz", s.readyz)
	r.Get("/static/{version}/*", s.assets.serve)

	r.Group(func(r chi.Router) {
		r.Use(s.loadUser)
		r.Get("/login", s.handle(s.showLogin))
		r.Post("/login", s.handle(s.login))
		r.Post("/logout", s.handle(s.logout))
		// Invite links are opened before their user exists (labelling block's owner).
		r.Get("/invite/{token}", s.handle(s.showInvite))
		r.Post("/invite/{token}", s.handle(s.acceptInvite))

		r.Group(func(r chi.Router) {
			r.Use(s.requireLogin)
			r.Get("/", s.handle(s.showHome))

			// Labelling routes (labellers and leads who are members).
			// LABELLING ROUTES BEGIN
			r.Route("/p/{project}", func(r chi.Router) {
				r.Use(s.requireProject)
				r.Get("/label", s.handle(s.showLabel))
				r.Get("/items/{item}/image", s.handle(s.itemImage))
				r.Get("/items/{item}/thumb", s.handle(s.itemThumb))
				r.With(s.requireLead).Post("/invites", s.handle(s.createInvite))
			})
			r.Route("/api/p/{project}", func(r chi.Router) {
				r.Use(s.requireProject)
				r.Post("/next", s.handle(s.claimNext))
				r.Post("/votes", s.handle(s.createVote))
				r.Post("/undo", s.handle(s.undoVote))
				r.Post("/skip", s.handle(s.skipItem))
			})
			// LABELLING ROUTES END

			// Lead routes: everything under /lead is refused to labellers with 403.
			r.Route("/lead", func(r chi.Router) {
				r.Use(s.requireLead)
				// LEAD ROUTES BEGIN
				r.Get("/projects", s.handle(s.listProjects))
				r.Get("/projects/new", s.handle(s.newProject))
				r.Post("/projects", s.handle(s.createProject))
				r.Route("/p/{project}", func(r chi.Router) {
					r.Use(s.requireProject)
					r.Get("/", s.handle(s.projectHome))
					r.Get("/setup", s.handle(s.showSetup))
					r.Post("/setup/taxonomy", s.handle(s.saveTaxonomy))
					r.Post("/setup/policy", s.handle(s.savePolicy))
					r.Post("/setup/pay", s.handle(s.savePay))
					r.Post("/setup/gold", s.handle(s.saveGold))
					r.Post("/setup/images", s.handle(s.uploadImages))
					r.Post("/setup/import", s.handle(s.importFolder))
					r.Get("/progress", s.handle(s.showProgress))
					r.Get("/agreement", s.handle(s.showAgreement))
					r.Get("/labellers", s.handle(s.showLabellers))
					r.Get("/labellers/{user}", s.handle(s.showLabeller))
					r.Post("/labellers/{user}/status", s.handle(s.setLabellerStatus))
					r.Get("/items", s.handle(s.showItems))
					r.Get("/items/{item}", s.handle(s.showItem))
					r.Post("/items/{item}/label", s.handle(s.setItemLabel))
					r.Get("/cost", s.handle(s.showCost))
					r.Get("/cost.csv", s.handle(s.costCSV))
					r.Get("/releases", s.handle(s.showReleases))
					r.Post("/releases", s.handle(s.createRelease))
					r.Get("/releases/{name}/download", s.handle(s.downloadRelease))
				})
				// LEAD ROUTES END
			})
		})
	})
	// Cross-origin POSTs are refused (403) before any handler runs.
	return http.NewCrossOriginProtection().Handler(r)
}

func (s *Server) logRequests(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		start := time.Now()
		ww := middleware.NewWrapResponseWriter(w, r.ProtoMajor)
		next.ServeHTTP(ww, r)
		s.log.Debug("request", "method", r.Method, "path", r.URL.Path, "status", ww.Status(),
			"ms", float64(time.Since(start).Microseconds())/1000)
	})
}

func securityHeaders(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		h := w.Header()
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("X-Frame-Options", "DENY")
		h.Set("Referrer-Policy", "same-origin")
		h.Set("Content-Security-Policy", "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; frame-ancestors 'none'")
		next.ServeHTTP(w, r)
	})
}
