package web

import (
	"errors"
	"log/slog"
	"net/http"

	"github.com/concord-labs/concord/store"
)

// errForbidden is returned by handlers when the user may not do this.
var errForbidden = errors.New("forbidden")

// errNotFound hides whether something exists from users who may not see it.
var errNotFound = store.ErrNotFound

// userError carries a status and a message that is safe to show.
type userError struct {
	status int
	msg    string
}

func (e *userError) Error() string { return e.msg }

func badRequest(msg string) error { return &userError{http.StatusBadRequest, msg} }

// handlerFunc is a handler that returns its error instead of writing it.
type handlerFunc func(w http.ResponseWriter, r *http.Request) error

// handle adapts a handlerFunc: store.ErrNotFound -> 404, store.ErrConflict ->
// 409, errForbidden -> 403, *userError -> its status, anything else -> 500.
// Only 5xx are logged with detail; users never see internal error text.
func (s *Server) handle(h handlerFunc) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		err := h(w, r)
		if err == nil {
			return
		}
		status, msg := http.StatusInternalServerError, "Something went wrong on our side. Please try again."
		var ue *userError
		switch {
		case errors.As(err, &ue):
			status, msg = ue.status, ue.msg
		case errors.Is(err, store.ErrNotFound):
			status, msg = http.StatusNotFound, "Not found."
		case errors.Is(err, errForbidden):
			status, msg = http.StatusForbidden, "You may not do this."
		case errors.Is(err, store.ErrConflict):
			status, msg = http.StatusConflict, "That clashes with what is already stored."
		default:
			s.log.Error("request failed", slog.Group("req", "method", r.Method, "path", r.URL.Path), "err", err)
		}
		s.writeError(w, r, status, msg)
	}
}

// writeError answers in JSON to API calls and with a page otherwise.
func (s *Server) writeError(w http.ResponseWriter, r *http.Request, status int, msg string) {
	if wantsJSON(r) {
		writeJSON(w, status, map[string]string{"error": msg})
		return
	}
	if err := s.render(w, r, status, errorPage(userFrom(r.Context()), status, msg)); err != nil {
		http.Error(w, msg, status)
	}
}
