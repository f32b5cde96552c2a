package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"time"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/web"
)

const serveUsage = "serve [--addr HOST:PORT] [--data DIR] [--secure-cookies] [--base-url URL]"

// serveConfig is the serve command's configuration, from flags and CONCORD_* variables.
type serveConfig struct {
	addr     string
	web      web.Config
	shutdown time.Duration
}

// bindServeFlags declares the flags serve and demo share.
func bindServeFlags(fs *flag.FlagSet, c *serveConfig) {
	fs.StringVar(&c.addr, "addr", "127.0.0.1:8080", "address to listen on")
	fs.StringVar(&c.web.DataDir, "data", defaultDataDir(), "folder for the image store")
	fs.BoolVar(&c.web.SecureCookies, "secure-cookies", false, "mark cookies Secure (set when users reach Concord over HTTPS)")
	fs.StringVar(&c.web.BaseURL, "base-url", "", "public address for invite links (default: from each request)")
	fs.DurationVar(&c.web.SessionTTL, "session-ttl", 12*time.Hour, "how long a login lasts")
	fs.StringVar(&c.web.ImportRoot, "import-root", "", "the only server folder leads may import images from (default: DATA/import)")
	fs.DurationVar(&c.web.EngineInterval, "refit-every", web.DefaultEngineInterval, "refit a project's Dawid-Skene model at most this often")
	fs.Int64Var(&c.web.EngineVotes, "refit-votes", web.DefaultEngineVotes, "... and only after this many new votes")
	fs.DurationVar(&c.shutdown, "shutdown-timeout", 15*time.Second, "how long to wait for requests in flight on SIGINT/SIGTERM")
}

func defaultDataDir() string {
	if d := os.Getenv("XDG_DATA_HOME"); d != "" {
		return filepath.Join(d, "concord", "files")
	}
	home, err := os.UserHomeDir()
	if err != nil {
		return "concord-files"
	}
	return filepath.Join(home, ".local", "share", "concord", "files")
}

func runServe(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "serve", serveUsage)
	var cfg serveConfig
	bindServeFlags(fs, &cfg)
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	s, closeDB, err := openStore(ctx, e)
	if err != nil {
		return err
	}
	defer closeDB()
	return serve(ctx, e, s, cfg, nil)
}

// serve listens on cfg.addr until ctx ends, then shuts down gracefully:
// stop accepting, finish requests in flight, stop background loops. ready,
// when not nil, receives the bound address once the server listens.
func serve(ctx context.Context, e *env, s *store.Store, cfg serveConfig, ready chan<- string) error {
	srv := web.New(s, e.logger, cfg.web)
	ln, err := net.Listen("tcp", cfg.addr)
	if err != nil {
		return fmt.Errorf("listen on %s: %w", cfg.addr, err)
	}
	hs := &http.Server{
		Handler:           srv.Handler(),
		ReadHeaderTimeout: 10 * time.Second,
		IdleTimeout:       2 * time.Minute,
	}
	bgCtx, stopBackground := context.WithCancel(context.Background())
	bgDone := srv.StartBackground(bgCtx)
	errc := make(chan error, 1)
	go func() { errc <- hs.Serve(ln) }()
	addr := ln.Addr().String()
	e.logger.Info("concord is serving", "addr", "http://"+addr)
	if ready != nil {
		ready <- addr
	}
	select {
	case err := <-errc:
		stopBackground()
		<-bgDone
		return err
	case <-ctx.Done():
	}
	e.logger.Info("shutting down")
	sctx, cancel := context.WithTimeout(context.Background(), cfg.shutdown)
	defer cancel()
	err = hs.Shutdown(sctx)
	stopBackground()
	<-bgDone
	if err != nil && !errors.Is(err, http.ErrServerClosed) {
		return fmt.Errorf("shutdown: %w", err)
	}
	return nil
}
