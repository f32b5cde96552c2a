package web

import (
	"net/http"

	"github.com/concord-labs/concord/store"
)

// showHome lists the projects the user can work on: every project for a
// lead, the member projects for a labeller.
func (s *Server) showHome(w http.ResponseWriter, r *http.Request) error {
	u := userFrom(r.Context())
	var ps []store.Project
	var err error
	if u.Role == store.RoleLead {
		ps, err = s.store.ListProjects(r.Context())
	} else {
		ps, err = s.store.ProjectsOfMember(r.Context(), u.ID)
	}
	if err != nil {
		return err
	}
	return s.render(w, r, http.StatusOK, homePage(u, ps))
}
