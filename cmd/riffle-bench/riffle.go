package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"time"

	"github.com/goccy/go-yaml"

	"riffle/proxy/sidecar"
)

// riffleYAML is the part of riffle.yaml the bench writes; the keys are
// those of riffle/proxy/config, and the test parses the result with
// config.Parse.
type riffleYAML struct {
	Listen        string          `yaml:"listen"`
	Admin         string          `yaml:"admin"`
	Store         string          `yaml:"store"`
	ShutdownGrace string          `yaml:"shutdown_grace"`
	Incumbent     riffleBackend   `yaml:"incumbent"`
	Challenger    riffleBackend   `yaml:"challenger"`
	Routes        []riffleRoute   `yaml:"routes"`
	User          riffleUser      `yaml:"user"`
	Experiment    riffleExpConfig `yaml:"experiment"`
}

type riffleBackend struct {
	URL     string `yaml:"url"`
	Timeout string `yaml:"timeout"`
}

type riffleRoute struct {
	Path string `yaml:"path"`
	List string `yaml:"list"`
	ID   string `yaml:"id"`
}

type riffleUser struct {
	Header string `yaml:"header"`
}

type riffleExpConfig struct {
	Name   string  `yaml:"name"`
	Policy string  `yaml:"policy"`
	Ramp   float64 `yaml:"ramp"`
}

// riffleConfig returns the riffle.yaml of the bench's riffle mode:
// team-draft on every request (ramp 1) of routePath, list /items keyed by
// /sku, user key from the shopper header, and a store at store.
func riffleConfig(listen, admin, store, incumbent, challenger string, timeout time.Duration) ([]byte, error) {
	c := riffleYAML{
		Listen:        listen,
		Admin:         admin,
		Store:         store,
		ShutdownGrace: "5s",
		Incumbent:     riffleBackend{URL: incumbent, Timeout: timeout.String()},
		Challenger:    riffleBackend{URL: challenger, Timeout: timeout.String()},
		Routes:        []riffleRoute{{Path: routePath, List: "/items", ID: "/sku"}},
		User:          riffleUser{Header: shopperHeader},
		Experiment:    riffleExpConfig{Name: "bench", Policy: "team-draft", Ramp: 1},
	}
	b, err := yaml.Marshal(c)
	if err != nil {
		return nil, fmt.Errorf("bench: riffle config: %w", err)
	}
	return b, nil
}

// serveRiffle writes a riffle.yaml into a temporary directory and runs
// riffle through sidecar.Serve, the code path of `riffle serve`, until ctx
// ends. It reports ready once the route answers 200.
func serveRiffle(ctx context.Context, incumbent, challenger string, timeout time.Duration, logw io.Writer, ready func(...string)) error {
	if err := checkBackends(incumbent, challenger); err != nil {
		return err
	}
	dir, err := os.MkdirTemp("", "riffle-bench-")
	if err != nil {
		return fmt.Errorf("bench: riffle temp dir: %w", err)
	}
	defer os.RemoveAll(dir)
	listen, err := freeAddr()
	if err != nil {
		return err
	}
	admin, err := freeAddr()
	if err != nil {
		return err
	}
	cfg, err := riffleConfig(listen, admin, filepath.Join(dir, "riffle.db"), incumbent, challenger, timeout)
	if err != nil {
		return err
	}
	path := filepath.Join(dir, "riffle.yaml")
	if err := os.WriteFile(path, cfg, 0o600); err != nil {
		return fmt.Errorf("bench: write riffle config: %w", err)
	}
	sctx, cancel := context.WithCancel(ctx)
	defer cancel()
	done := make(chan error, 1)
	go func() { done <- sidecar.Serve(sctx, path, logw) }()
	base := "http://" + listen
	if exited, err := awaitRoute(ctx, base+routePath, done, 20*time.Second); err != nil {
		if !exited {
			cancel()
			<-done // riffle has let go of the store before the directory goes
		}
		return err
	}
	ready(base)
	if err := <-done; err != nil {
		return fmt.Errorf("bench: riffle: %w", err)
	}
	return nil
}

// freeAddr returns a loopback address with a port that was free a moment
// ago; riffle listens on it. (Another process could take it in between;
// on a bench machine that is unlikely, and the start then fails clearly.)
func freeAddr() (string, error) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return "", fmt.Errorf("bench: find a free port: %w", err)
	}
	addr := ln.Addr().String()
	if err := ln.Close(); err != nil {
		return "", fmt.Errorf("bench: find a free port: %w", err)
	}
	return addr, nil
}

// awaitRoute polls url until it answers 200, Serve returns (its error is
// the reason, and exited is true), or wait passes.
func awaitRoute(ctx context.Context, url string, done <-chan error, wait time.Duration) (exited bool, err error) {
	ctx, cancel := context.WithTimeout(ctx, wait)
	defer cancel()
	tick := time.NewTicker(20 * time.Millisecond)
	defer tick.Stop()
	client := &http.Client{}
	defer client.CloseIdleConnections()
	last := "no answer yet"
	for {
		select {
		case err := <-done:
			if err == nil {
				err = errors.New("returned before serving")
			}
			return true, fmt.Errorf("bench: riffle: sidecar.Serve: %w", err)
		case <-ctx.Done():
			return false, fmt.Errorf("bench: riffle not ready within %v (%s): %w", wait, last, ctx.Err())
		case <-tick.C:
		}
		req, err := http.NewRequestWithContext(ctx, http.MethodGet, url, nil)
		if err != nil {
			return false, fmt.Errorf("bench: riffle readiness request: %w", err)
		}
		req.Header.Set(shopperHeader, "shopper-ready")
		resp, err := client.Do(req)
		if err != nil {
			last = err.Error()
			continue
		}
		_, _ = io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		if resp.StatusCode == http.StatusOK {
			return false, nil
		}
		last = "status " + resp.Status
	}
}
