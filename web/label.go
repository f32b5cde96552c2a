package web

import (
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"net/http"
	"regexp"
	"strconv"
	"time"

	"github.com/concord-labs/concord/store"
)

// undoWindow is how long after a vote its labeller may take it back.
const undoWindow = 10 * time.Second

// maxHeld bounds the items a client may say it holds (its queue and the
// items it recently voted on or skipped), so a request cannot make the
// claim query arbitrarily slow.
const maxHeld = 50

// itemJSON is all a labeller learns about an item: never its status,
// votes, consensus or whether it is a gold item.
type itemJSON struct {
	ID     int64  `json:"id"`
	Image  string `json:"image"`
	Width  int    `json:"width"`
	Height int    `json:"height"`
}

func itemView(p *store.Project, it store.Item) *itemJSON {
	return &itemJSON{ID: it.ID, Image: "/p/" + p.Slug + "/items/" + strconv.FormatInt(it.ID, 10) + "/image",
		Width: it.Width, Height: it.Height}
}

// labelResponse is the answer to every labelling API call.
type labelResponse struct {
	Next     *itemJSON     `json:"next"`               // a newly claimed item, or null when none is left
	Item     *itemJSON     `json:"item,omitempty"`     // the item an undo gave back
	Tally    *store.Tally  `json:"tally,omitempty"`    // the labeller's work today
	Feedback *goldFeedback `json:"feedback,omitempty"` // after a gold item, if the project shows it
	Repeat   bool          `json:"repeat,omitempty"`   // the vote id was stored before
}

type goldFeedback struct {
	Correct  bool   `json:"correct"`
	Expected string `json:"expected"`
}

// checkCanLabel refuses labellers whose membership is paused or blocked,
// with the reason the lead or the engine gave.
func (s *Server) checkCanLabel(r *http.Request, p *store.Project) error {
	u := userFrom(r.Context())
	if u.Role == store.RoleLead {
		return nil
	}
	m := memberFrom(r.Context())
	if m == nil || m.ProjectID != p.ID {
		mm, err := s.store.MemberOf(r.Context(), p.ID, u.ID)
		if err != nil {
			return err
		}
		m = &mm
	}
	switch m.Status {
	case store.StatusActive:
		return nil
	case store.StatusPaused:
		msg := "Your work on this project is paused."
		if m.StatusReason != "" {
			msg += " " + m.StatusReason
		}
		return &userError{http.StatusForbidden, msg}
	default:
		return &userError{http.StatusForbidden, "You can no longer label in this project. Ask your project lead."}
	}
}

// claimRequest asks for the labeller's next item, drawing against the
// gold rate first, and for their tally of today when withTally.
func (s *Server) claimRequest(r *http.Request, p *store.Project, exclude []int64, withTally bool) store.ClaimRequest {
	c := store.ClaimRequest{ProjectID: p.ID, LabellerID: userFrom(r.Context()).ID, Exclude: exclude,
		Gold: rand.Float64() < p.Policy.GoldRate, GoldSeed: rand.Int64(),
		Lifetime: time.Duration(p.Policy.ClaimSeconds) * time.Second}
	if withTally {
		c.TallySince = s.today()
	}
	return c
}

func (s *Server) today() time.Time {
	now := s.now()
	y, m, d := now.Date()
	return time.Date(y, m, d, 0, 0, 0, 0, now.Location())
}

// claimFor claims the next item (nil when none is left), with the
// labeller's tally when withTally (else the tally is nil).
func (s *Server) claimFor(r *http.Request, p *store.Project, exclude []int64, withTally bool) (*itemJSON, *store.Tally, error) {
	c, err := s.store.ClaimNext(r.Context(), s.claimRequest(r, p, exclude, withTally))
	if errors.Is(err, store.ErrNotFound) {
		t, err := s.tallyAfter(r, p, nil, withTally)
		return nil, t, err
	}
	if err != nil {
		return nil, nil, err
	}
	t, err := s.tallyAfter(r, p, &c, withTally)
	return itemView(p, c.Item), t, err
}

func (s *Server) tally(r *http.Request, p *store.Project) (*store.Tally, error) {
	t, err := s.store.VoteTally(r.Context(), p.ID, userFrom(r.Context()).ID, s.today())
	return &t, err
}

// tallyAfter is the labeller's tally to answer with, nil when not asked
// for: the one claim c (asked with a tally) read, or a count of its own
// when nothing was claimed.
func (s *Server) tallyAfter(r *http.Request, p *store.Project, c *store.Claim, asked bool) (*store.Tally, error) {
	switch {
	case !asked:
		return nil, nil
	case c != nil:
		return &c.Tally, nil
	}
	return s.tally(r, p)
}

// decodeJSON reads a small JSON body into v, or says what is wrong.
func decodeJSON(r *http.Request, v any) error {
	dec := json.NewDecoder(http.MaxBytesReader(nil, r.Body, 64<<10))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return badRequest("The request body is not valid JSON for this call: " + err.Error())
	}
	return nil
}

func checkHeld(ids []int64) error {
	if len(ids) > maxHeld {
		return badRequest(fmt.Sprintf("exclude: at most %d items, got %d", maxHeld, len(ids)))
	}
	return nil
}

// claimNext hands out the next item: POST {"exclude": [ids held],
// "tally": true to have the labeller's tally of today in the answer}.
// The tally is asked for, not always sent: the screen keeps its own count
// and checks it now and then, and every vote is spared reading it.
func (s *Server) claimNext(w http.ResponseWriter, r *http.Request) error {
	p := projectFrom(r.Context())
	var req struct {
		Exclude []int64 `json:"exclude"`
		Tally   bool    `json:"tally"`
	}
	if err := decodeJSON(r, &req); err != nil {
		return err
	}
	if err := checkHeld(req.Exclude); err != nil {
		return err
	}
	if err := s.checkCanLabel(r, p); err != nil {
		return err
	}
	next, t, err := s.claimFor(r, p, req.Exclude, req.Tally)
	if err != nil {
		return err
	}
	return writeJSON(w, http.StatusOK, labelResponse{Next: next, Tally: t})
}

var uuidPattern = regexp.MustCompile(`^[0-9a-fA-F]{8}-[0-9a-fA-F]{4}-[0-9a-fA-F]{4}-[0-9a-fA-F]{4}-[0-9a-fA-F]{12}$`)

// voteRequest is one vote. Label is a label key, or null for "can't tell".
type voteRequest struct {
	ID      string  `json:"id"`
	Item    int64   `json:"item"`
	Label   *string `json:"label"`
	Seconds float64 `json:"seconds"`
	Exclude []int64 `json:"exclude"`
	Tally   bool    `json:"tally"` // send the labeller's tally of today back
}

// createVote records a vote and claims the next item in one round trip.
func (s *Server) createVote(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p := projectFrom(ctx)
	u := userFrom(ctx)
	var req voteRequest
	if err := decodeJSON(r, &req); err != nil {
		return err
	}
	switch {
	case !uuidPattern.MatchString(req.ID):
		return badRequest("id: a vote needs a UUID made by the client, like 7b0c1a1e-0000-4000-8000-000000000001")
	case req.Item <= 0:
		return badRequest("item: missing")
	case req.Seconds < 0 || req.Seconds > 86400:
		return badRequest("seconds: must be between 0 and 86400")
	}
	if err := checkHeld(req.Exclude); err != nil {
		return err
	}
	// Membership is checked inside the vote's SQL (a paused member's claim
	// does not count), so the common case costs no extra query.
	vote := store.NewVote{ID: req.ID, ProjectID: p.ID, ItemID: req.Item, LabellerID: u.ID, LabelKey: req.Label, Seconds: req.Seconds}
	next := s.claimRequest(r, p, append(req.Exclude, req.Item), req.Tally)
	res, claim, err := s.store.RecordVoteAndClaim(ctx, vote, s.decider(p), &next)
	switch {
	case errors.Is(err, store.ErrUnknownLabel):
		return badRequest("label: no label with this key in the project")
	case errors.Is(err, store.ErrNoClaim):
		if err := s.checkCanLabel(r, p); err != nil {
			return err
		}
		return &userError{http.StatusConflict, "This item is no longer yours to vote on; it may have expired or been voted on already."}
	case errors.Is(err, store.ErrConflict):
		return &userError{http.StatusConflict, "You have voted on this item already."}
	case err != nil:
		return err
	}
	out := labelResponse{Repeat: res.Duplicate}
	if p.Policy.GoldFeedback && res.GoldLabel != nil {
		if out.Feedback, err = s.feedback(r, p, *res.GoldLabel, res.VotedLabel); err != nil {
			return err
		}
	}
	if claim != nil {
		out.Next = itemView(p, claim.Item)
	}
	if out.Tally, err = s.tallyAfter(r, p, claim, req.Tally); err != nil {
		return err
	}
	return writeJSON(w, http.StatusOK, out)
}

func (s *Server) feedback(r *http.Request, p *store.Project, gold int64, voted *int64) (*goldFeedback, error) {
	labels, err := s.store.Labels(r.Context(), p.ID)
	if err != nil {
		return nil, err
	}
	fb := &goldFeedback{Correct: voted != nil && *voted == gold}
	for _, l := range labels {
		if l.ID == gold {
			fb.Expected = l.Name
		}
	}
	return fb, nil
}

// undoVote takes back the labeller's last vote if it is recent enough and
// hands its item back.
func (s *Server) undoVote(w http.ResponseWriter, r *http.Request) error {
	p := projectFrom(r.Context())
	if err := s.checkCanLabel(r, p); err != nil {
		return err
	}
	it, err := s.store.UndoLastVote(r.Context(), p.ID, userFrom(r.Context()).ID, undoWindow,
		time.Duration(p.Policy.ClaimSeconds)*time.Second, s.decider(p))
	if errors.Is(err, store.ErrNotFound) {
		return &userError{http.StatusConflict, fmt.Sprintf("Nothing to undo: a vote can be taken back for %d seconds.", int(undoWindow.Seconds()))}
	}
	if err != nil {
		return err
	}
	t, err := s.tally(r, p)
	if err != nil {
		return err
	}
	return writeJSON(w, http.StatusOK, labelResponse{Item: itemView(p, it), Tally: t})
}

// skipItem gives an item back and claims another: POST {"item": id, "exclude": [...]}.
func (s *Server) skipItem(w http.ResponseWriter, r *http.Request) error {
	p := projectFrom(r.Context())
	var req struct {
		Item    int64   `json:"item"`
		Exclude []int64 `json:"exclude"`
	}
	if err := decodeJSON(r, &req); err != nil {
		return err
	}
	if err := checkHeld(req.Exclude); err != nil {
		return err
	}
	if err := s.checkCanLabel(r, p); err != nil {
		return err
	}
	if err := s.store.ReleaseClaim(r.Context(), p.ID, userFrom(r.Context()).ID, req.Item); err != nil {
		return err
	}
	next, _, err := s.claimFor(r, p, append(req.Exclude, req.Item), false)
	if err != nil {
		return err
	}
	return writeJSON(w, http.StatusOK, labelResponse{Next: next})
}

// showLabel renders the labelling screen.
func (s *Server) showLabel(w http.ResponseWriter, r *http.Request) error {
	p := projectFrom(r.Context())
	u := userFrom(r.Context())
	labels, err := s.store.Labels(r.Context(), p.ID)
	if err != nil {
		return err
	}
	t, err := s.tally(r, p)
	if err != nil {
		return err
	}
	blocked := ""
	if err := s.checkCanLabel(r, p); err != nil {
		var ue *userError
		if !errors.As(err, &ue) {
			return err
		}
		blocked = ue.msg
	}
	data := labelScreenData{Project: p.Slug, UndoSeconds: int(undoWindow.Seconds()), Tally: *t}
	for _, l := range labels {
		data.Labels = append(data.Labels, labelJSON{ID: l.ID, Key: l.Key, Name: l.Name, Description: l.Description,
			Parent: l.ParentID, Leaf: l.IsLeaf})
	}
	return s.render(w, r, http.StatusOK, labelPage(u, p, data, blocked))
}

// labelScreenData goes to the script as a JSON block (not executed, so the
// CSP's script-src 'self' allows it).
type labelScreenData struct {
	Project     string      `json:"project"`
	UndoSeconds int         `json:"undo_seconds"`
	Tally       store.Tally `json:"tally"`
	Labels      []labelJSON `json:"labels"`
}

type labelJSON struct {
	ID          int64  `json:"id"`
	Key         string `json:"key"`
	Name        string `json:"name"`
	Description string `json:"description"`
	Parent      *int64 `json:"parent"`
	Leaf        bool   `json:"leaf"`
}
