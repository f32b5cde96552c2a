package web

import (
	"errors"
	"io"
	"net/http"
	"strconv"

	"github.com/go-chi/chi/v5"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/blob"
)

// itemImage serves an item's original image.
func (s *Server) itemImage(w http.ResponseWriter, r *http.Request) error {
	return s.serveItem(w, r, false)
}

// itemThumb serves an item's thumbnail (the original when it has none).
func (s *Server) itemThumb(w http.ResponseWriter, r *http.Request) error {
	return s.serveItem(w, r, true)
}

// serveItem streams an item's bytes from the image store. The blob key
// comes from the item's row, never from the request, and the blob store
// accepts only 64-hex-digit keys, so no request can name a file outside it.
// A labeller may fetch only items they hold a claim on or voted on; any
// other item is 404, so ids cannot be probed.
func (s *Server) serveItem(w http.ResponseWriter, r *http.Request, thumb bool) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	u := userFrom(ctx)
	id, err := strconv.ParseInt(chi.URLParam(r, "item"), 10, 64)
	if err != nil || id <= 0 {
		return errNotFound
	}
	it, err := s.store.Item(ctx, p.ID, id)
	if err != nil {
		return err
	}
	if u.Role != store.RoleLead {
		ok, err := s.store.ItemAccess(ctx, p.ID, u.ID, id)
		if err != nil {
			return err
		}
		if !ok {
			return errNotFound
		}
	}
	key, ctype := it.FileKey, it.MediaType
	if thumb && it.ThumbKey != "" {
		key, ctype = it.ThumbKey, "image/jpeg"
	}
	bs, err := blob.NewLocal(s.cfg.DataDir)
	if err != nil {
		return err
	}
	f, err := bs.Open(ctx, key)
	if errors.Is(err, blob.ErrNotFound) || errors.Is(err, blob.ErrBadKey) {
		return errNotFound
	}
	if err != nil {
		return err
	}
	defer f.Close()
	h := w.Header()
	h.Set("Content-Type", ctype)
	// The bytes never change for a key, but who may see them does.
	h.Set("Cache-Control", "private, max-age=86400")
	h.Set("Content-Security-Policy", "default-src 'none'; sandbox")
	_, err = io.Copy(w, f)
	return err
}
