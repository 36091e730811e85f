package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"runtime"
	"runtime/pprof"
	"strings"
	"sync"
	"time"
)

// runChild is the entry point of a child process: args are the role and
// its flags (see child for the protocol). It serves until stdin reaches
// end of file.
func runChild(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	readied := false
	ready := func(urls ...string) {
		readied = true
		fmt.Fprintln(stdout, "ready "+strings.Join(urls, " "))
	}
	err := runRole(ctx, args, stdin, stderr, ready)
	if err == nil {
		return 0
	}
	if readied {
		fmt.Fprintln(stderr, err)
	} else {
		fmt.Fprintln(stdout, "fail "+strings.ReplaceAll(err.Error(), "\n", " | "))
	}
	return 1
}

// runRole parses the role's flags and runs it with profiling if asked.
func runRole(ctx context.Context, args []string, stdin io.Reader, stderr io.Writer, ready func(...string)) error {
	if len(args) == 0 {
		return fmt.Errorf("%s: no role: %w", childFlag, errUsage)
	}
	role := args[0]
	fs := flag.NewFlagSet(childFlag+" "+role, flag.ContinueOnError)
	fs.SetOutput(stderr)
	incumbent := fs.String("incumbent", "", "incumbent backend base URL")
	challenger := fs.String("challenger", "", "challenger backend base URL")
	latency := fs.Duration("latency", 5*time.Millisecond, "backends' fixed latency")
	timeout := fs.Duration("timeout", 200*time.Millisecond, "proxies' per-backend deadline")
	profile := fs.String("profile", "", "directory for CPU and heap profiles")
	if err := fs.Parse(args[1:]); err != nil {
		return fmt.Errorf("%s %s: %w: %w", childFlag, role, errUsage, err)
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	// The parent closes stdin to stop the child (or dies, which closes it
	// too). This reader is never joined: it ends with the process.
	go func() {
		_, _ = io.Copy(io.Discard, stdin)
		cancel()
	}()
	stopProfile, err := startProfile(*profile, role)
	if err != nil {
		return err
	}
	switch role {
	case "backends":
		err = serveBackends(ctx, *latency, ready)
	case "fanout":
		err = serveFanout(ctx, *incumbent, *challenger, *timeout, ready)
	case "riffle":
		err = serveRiffle(ctx, *incumbent, *challenger, *timeout, stderr, ready)
	default:
		err = fmt.Errorf("%s: unknown role %q: %w", childFlag, role, errUsage)
	}
	return errors.Join(err, stopProfile())
}

// serveBackends runs the incumbent and the challenger model servers on two
// loopback ports until ctx ends.
func serveBackends(ctx context.Context, latency time.Duration, ready func(...string)) error {
	inc, chal, err := bodies(1)
	if err != nil {
		return err
	}
	li, ui, err := listenLoopback()
	if err != nil {
		return err
	}
	lc, uc, err := listenLoopback()
	if err != nil {
		li.Close()
		return err
	}
	ready(ui, uc)
	var wg sync.WaitGroup
	var errs [2]error
	wg.Go(func() { errs[0] = serve(ctx, li, backend(inc, latency)) })
	wg.Go(func() { errs[1] = serve(ctx, lc, backend(chal, latency)) })
	wg.Wait()
	return errors.Join(errs[:]...)
}

// listenLoopback listens on a free loopback port and returns its base URL.
func listenLoopback() (net.Listener, string, error) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return nil, "", fmt.Errorf("bench: listen on loopback: %w", err)
	}
	return ln, "http://" + ln.Addr().String(), nil
}

// serve runs h on ln until ctx ends, then shuts down gracefully.
func serve(ctx context.Context, ln net.Listener, h http.Handler) error {
	srv := &http.Server{Handler: h, ReadHeaderTimeout: 5 * time.Second}
	errc := make(chan error, 1)
	go func() { errc <- srv.Serve(ln) }()
	select {
	case err := <-errc:
		return fmt.Errorf("bench: serve %s: %w", ln.Addr(), err)
	case <-ctx.Done():
	}
	sctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	err := srv.Shutdown(sctx)
	<-errc
	if err != nil {
		return fmt.Errorf("bench: shut down %s: %w", ln.Addr(), err)
	}
	return nil
}

// startProfile starts a CPU profile into dir/<role>-cpu.pprof when dir is
// set. The returned function stops it and writes dir/<role>-heap.pprof,
// whose alloc_space and alloc_objects samples cover the whole run.
func startProfile(dir, role string) (func() error, error) {
	if dir == "" {
		return func() error { return nil }, nil
	}
	cpu, err := os.Create(filepath.Join(dir, role+"-cpu.pprof"))
	if err != nil {
		return nil, fmt.Errorf("bench: CPU profile: %w", err)
	}
	if err := pprof.StartCPUProfile(cpu); err != nil {
		cpu.Close()
		return nil, fmt.Errorf("bench: start CPU profile: %w", err)
	}
	return func() error {
		pprof.StopCPUProfile()
		errCPU := cpu.Close()
		runtime.GC() // so that the heap profile's in-use figures are current
		heap, err := os.Create(filepath.Join(dir, role+"-heap.pprof"))
		if err != nil {
			return fmt.Errorf("bench: heap profile: %w", errors.Join(errCPU, err))
		}
		errHeap := pprof.Lookup("heap").WriteTo(heap, 0)
		if err := errors.Join(errCPU, errHeap, heap.Close()); err != nil {
			return fmt.Errorf("bench: write profiles: %w", err)
		}
		return nil
	}, nil
}
