package main

import (
	"context"
	"flag"
	"fmt"
	"net/http"
	"time"
)

// runHealthcheck asks a running server whether it is up: the container image
// has no shell tools, so its HEALTHCHECK calls the binary itself.
func runHealthcheck(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("healthcheck", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	url := fs.String("url", "http://127.0.0.1:8080/health", "address to probe (/health: process up; /ready: database reachable)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	ctx, cancel := context.WithTimeout(ctx, 3*time.Second)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, *url, nil)
	if err != nil {
		return err
	}
	res, err := http.DefaultClient.Do(req)
	if err != nil {
		return fmt.Errorf("healthcheck: %w", err)
	}
	res.Body.Close()
	if res.StatusCode != http.StatusOK {
		return fmt.Errorf("healthcheck: %s answered %d", *url, res.StatusCode)
	}
	fmt.Fprintln(e.stdout, "ok")
	return nil
}
