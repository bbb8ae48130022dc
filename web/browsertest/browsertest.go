// Package browsertest runs Debian's headless Chromium for end-to-end tests,
// driven from Go with chromedp. It finds the browser, starts it with the flags
// that work as root in a container and in CI, bounds every test with a
// timeout, and saves a screenshot when a step or the test fails, logging where.
//
// A missing browser fails the test, never skips it: under CI=true that is a
// broken build machine, and on a developer's machine the message says how to
// install the browser (.ci/run installs it).
package browsertest

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

// EnvBrowser names a browser binary to use instead of the one on the PATH.
const EnvBrowser = "COHORTDESK_BROWSER"

// ErrNoBrowser means no usable browser binary was found.
var ErrNoBrowser = errors.New("browsertest: no chromium browser found")

// Find returns the browser to run: $COHORTDESK_BROWSER when set, else
// chromium on the PATH, else Debian's /usr/bin/chromium.
func Find() (string, error) {
	if p := os.Getenv(EnvBrowser); p != "" {
		if path, err := exec.LookPath(p); err == nil {
			return path, nil
		}
		return "", fmt.Errorf("%w: %s=%q is not an executable", ErrNoBrowser, EnvBrowser, p)
	}
	for _, name := range []string{"chromium", "/usr/bin/chromium"} {
		if path, err := exec.LookPath(name); err == nil {
			return path, nil
		}
	}
	return "", ErrNoBrowser
}

// Flags are the browser's command-line switches besides the user data folder:
// headless without a GPU, and nothing that reaches the network on its own
// (updates, sync, background fetches), so a test sees only its own traffic.
// The sandbox needs an unprivileged user; as root it must be off.
func Flags(root bool) []chromedp.ExecAllocatorOption {
	opts := []chromedp.ExecAllocatorOption{
		chromedp.Flag("headless", true),
		chromedp.Flag("disable-gpu", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("no-first-run", true),
		chromedp.Flag("no-default-browser-check", true),
		chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.Flag("hide-scrollbars", true),
		chromedp.Flag("mute-audio", true),
		chromedp.WindowSize(1280, 900),
	}
	if root {
		opts = append(opts, chromedp.Flag("no-sandbox", true))
	}
	return opts
}

// Browser is one headless browser tab for one test.
type Browser struct {
	tb    testing.TB
	ctx   context.Context
	shots atomic.Int32
}

// Start starts a fresh browser (its own user data folder) for tb. The whole
// test's browser work must finish within timeout. The browser stops when the
// test ends; if the test failed, a screenshot of the page is saved first.
func Start(tb testing.TB, timeout time.Duration) *Browser {
	tb.Helper()
	path, err := Find()
	if err != nil {
		if os.Getenv("CI") == "true" {
			tb.Fatalf("%v: the CI machine must have it (.ci/run installs Debian's chromium package)", err)
		}
		tb.Fatalf("%v: install it with `apt-get install -y chromium` (or set %s to a browser binary) and run the test again", err, EnvBrowser)
	}
	profile := tb.TempDir() // removed after the browser has stopped (cleanups run last-in, first-out)
	opts := append(Flags(os.Geteuid() == 0), chromedp.ExecPath(path), chromedp.UserDataDir(profile))
	allocCtx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancelTab := chromedp.NewContext(allocCtx, chromedp.WithLogf(func(string, ...any) {}))
	b := &Browser{tb: tb, ctx: ctx}
	tb.Cleanup(func() {
		cancelTab()
		cancelAlloc()
	})
	// The first run starts the browser; it must not carry the timeout (the
	// timeout would stop the browser itself), so start it, then bound the rest.
	if err := chromedp.Do(ctx, chromedp.Navigate("about:blank")); err != nil {
		tb.Fatalf("browsertest: start %s: %v", path, err)
	}
	tctx, cancelTimeout := context.WithTimeout(ctx, timeout)
	b.ctx = tctx
	tb.Cleanup(func() {
		if tb.Failed() {
			b.Screenshot("failure")
		}
		cancelTimeout()
	})
	return b
}

// Context is the tab's context, for chromedp.Run with actions that return a
// value.
func (b *Browser) Context() context.Context { return b.ctx }

// Do runs steps in order; on the first error it saves a screenshot and fails
// the test, naming the step by what.
func (b *Browser) Do(what string, steps ...chromedp.Action[chromedp.Void]) {
	b.tb.Helper()
	if err := chromedp.Do(b.ctx, steps...); err != nil {
		shot := b.Screenshot(what)
		b.tb.Fatalf("browser: %s: %v (screenshot: %s)", what, err, shot)
	}
}

// Text is the visible text of the first element matching the CSS selector,
// waiting for it to be visible.
func (b *Browser) Text(what, css string) string {
	b.tb.Helper()
	b.Do(what, chromedp.WaitVisible(chromedp.CSS(css)))
	s, err := chromedp.Run(b.ctx, chromedp.Text(chromedp.CSS(css)))
	if err != nil {
		shot := b.Screenshot(what)
		b.tb.Fatalf("browser: %s: %v (screenshot: %s)", what, err, shot)
	}
	return strings.TrimSpace(s)
}

// Location is the address of the page shown.
func (b *Browser) Location() string {
	b.tb.Helper()
	loc, err := chromedp.Run(b.ctx, chromedp.Location())
	if err != nil {
		b.tb.Fatalf("browser: location: %v", err)
	}
	return loc
}

// Screenshot saves the tab as a PNG and returns the file's path (or why it
// could not). The folder is under $TMPDIR and kept after the test, so the
// picture of a failure can be looked at.
func (b *Browser) Screenshot(name string) string {
	b.tb.Helper()
	// A short, separate deadline: after a timeout the test's context is done,
	// and the picture of that moment is the one most wanted.
	ctx, cancel := context.WithTimeout(context.WithoutCancel(b.ctx), 10*time.Second)
	defer cancel()
	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		msg := "no screenshot: " + err.Error()
		b.tb.Log(msg)
		return msg
	}
	dir, err := os.MkdirTemp("", "browsertest-")
	if err != nil {
		return "no screenshot: " + err.Error()
	}
	safe := strings.Map(func(r rune) rune {
		if r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' {
			return r
		}
		return '_'
	}, name)
	file := filepath.Join(dir, fmt.Sprintf("%s-%02d-%s.png", strings.ReplaceAll(b.tb.Name(), "/", "_"), b.shots.Add(1), safe))
	if err := os.WriteFile(file, png, 0o644); err != nil {
		return "no screenshot: " + err.Error()
	}
	b.tb.Logf("browser screenshot: %s", file)
	return file
}

// HTMXSettled waits until htmx has finished every request, swap and settle
// and has taken over every element it drives. A click between a swap and
// htmx's processing of the new content submits the form the plain way,
// which a slow machine makes likely.
func HTMXSettled() chromedp.Action[chromedp.Void] {
	return chromedp.Poll[chromedp.Void](`document.querySelector('.htmx-request, .htmx-swapping, .htmx-settling, .htmx-added') === null &&
		[...document.querySelectorAll('[hx-get], [hx-post]')].every(e => e['htmx-internal-data'] !== undefined)`,
		chromedp.WithPollingTimeout(30*time.Second))
}
