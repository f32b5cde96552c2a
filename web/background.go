package web

import (
	"context"
	"time"
)

// StartBackground starts the server's background loops (session clean-up;
// the agreement engine's refit loop joins here) and returns a channel closed
// when they have all stopped after ctx ends.
func (s *Server) StartBackground(ctx context.Context) <-chan struct{} {
	done := make(chan struct{})
	go func() {
		defer close(done)
		defer waitFor(s.startEngine(ctx))
		t := time.NewTicker(10 * time.Minute)
		defer t.Stop()
		for {
			if _, err := s.store.DeleteExpiredSessions(ctx, 24*time.Hour); err != nil && ctx.Err() == nil {
				s.log.Warn("clean up sessions", "err", err)
			}
			select {
			case <-ctx.Done():
				return
			case <-t.C:
			}
		}
	}()
	return done
}
