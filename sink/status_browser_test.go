package sink

import (
	"context"
	"fmt"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"
)

// chromiumPath is Debian's Chromium, which the browser test drives.
const chromiumPath = "/usr/bin/chromium"

// svgBox is an SVG element's class and rendered size.
type svgBox struct {
	Class  string  `json:"class"`
	Width  float64 `json:"width"`
	Height float64 `json:"height"`
}

// run runs a on ctx's tab and returns its value, failing the test on error.
func run[T any](ctx context.Context, t *testing.T, a chromedp.Action[T]) T {
	t.Helper()
	v, err := chromedp.Run(ctx, a)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestStatusPageBrowser opens the status page in headless Chromium, checks
// that every model and chart renders with a non-empty box and that the
// console stays free of errors, and saves full-page screenshots at desktop
// and phone widths.
func TestStatusPageBrowser(t *testing.T) {
	if testing.Short() {
		t.Skip("browser test skipped in -short mode")
	}
	if _, err := os.Stat(chromiumPath); err != nil {
		t.Skip("chromium not installed: apt-get install chromium")
	}
	store := statusStore(t, true)
	srv := httptest.NewServer(NewHandler(HandlerOptions{Store: store, Refresh: time.Hour, Version: "test",
		Ready: func() error { return nil }}))
	t.Cleanup(srv.Close)

	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(chromiumPath),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-quic", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(t.TempDir()),
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	t.Cleanup(cancel)
	ctx, cancelAlloc := chromedp.NewExecAllocator(ctx, opts...)
	t.Cleanup(cancelAlloc)
	ctx, cancelTab := chromedp.NewContext(ctx)
	t.Cleanup(cancelTab)

	// Start the browser, then listen: the listener sees every console call,
	// uncaught exception and browser log entry before the command that
	// follows it returns.
	if err := chromedp.Do(ctx); err != nil {
		t.Fatalf("starting %s: %v", chromiumPath, err)
	}
	var mu sync.Mutex
	var problems []string
	err := chromedp.Listen(ctx, func(ev any) {
		mu.Lock()
		defer mu.Unlock()
		switch ev := ev.(type) {
		case *runtime.EventConsoleAPICalled:
			if ev.Type == runtime.ConsoleAPICalledTypeError || ev.Type == runtime.ConsoleAPICalledTypeAssert ||
				ev.Type == runtime.ConsoleAPICalledTypeWarning {
				var args []string
				for _, a := range ev.Args {
					args = append(args, a.Description+string(a.Value))
				}
				problems = append(problems, fmt.Sprintf("console.%s: %s", ev.Type, strings.Join(args, " ")))
			}
		case *runtime.EventExceptionThrown:
			problems = append(problems, "exception: "+ev.ExceptionDetails.Text)
		case *log.EventEntryAdded:
			if ev.Entry.Level == log.EntryLevelError || ev.Entry.Level == log.EntryLevelWarning {
				problems = append(problems, fmt.Sprintf("log %s %s: %s %s", ev.Entry.Level, ev.Entry.Source, ev.Entry.Text, ev.Entry.URL))
			}
		}
	})
	if err != nil {
		t.Fatal(err)
	}

	for _, vp := range []struct {
		name          string
		width, height int64
		mobile        bool
	}{{"desktop", 1280, 900, false}, {"phone", 390, 844, true}} {
		t.Run(vp.name, func(t *testing.T) {
			emulate := []chromedp.EmulateViewportOption{chromedp.EmulateScale(1)}
			if vp.mobile {
				emulate = append(emulate, chromedp.EmulateMobile)
			}
			if err := chromedp.Do(ctx,
				chromedp.EmulateViewport(vp.width, vp.height, emulate...),
				chromedp.Navigate(srv.URL+"/"),
				chromedp.WaitReady("body"),
			); err != nil {
				t.Fatal(err)
			}
			title := run(ctx, t, chromedp.Title())
			models := run(ctx, t, chromedp.Evaluate[[]string](`[...document.querySelectorAll('section.model h2 a')].map(a => a.textContent)`))
			boxes := run(ctx, t, chromedp.Evaluate[[]svgBox](`[...document.querySelectorAll('svg')].map(s => {
				const r = s.getBoundingClientRect();
				return {class: s.getAttribute('class'), width: r.width, height: r.height};
			})`))
			overflow := run(ctx, t, chromedp.Evaluate[bool](`document.documentElement.scrollWidth > window.innerWidth + 1`))
			png := run(ctx, t, chromedp.FullScreenshot(100))
			if title != "lariat status" {
				t.Errorf("title %q", title)
			}
			if strings.Join(models, ",") != "clf,lin" {
				t.Errorf("models shown: %q", models)
			}
			// lin: bars, path, loss, sparkline; clf adds the ROC curve.
			if len(boxes) != 9 {
				t.Errorf("%d SVGs rendered, want 9: %+v", len(boxes), boxes)
			}
			for i, b := range boxes {
				if b.Width <= 0 || b.Height <= 0 {
					t.Errorf("SVG %d (%s) has an empty box %gx%g", i, b.Class, b.Width, b.Height)
				}
				if b.Width > float64(vp.width) {
					t.Errorf("SVG %d (%s) is wider (%g) than the viewport", i, b.Class, b.Width)
				}
			}
			if overflow {
				t.Error("page scrolls horizontally")
			}
			path := filepath.Join(t.TempDir(), "status-"+vp.name+".png")
			if dir := os.Getenv("LARIAT_SCREENSHOT_DIR"); dir != "" {
				path = filepath.Join(dir, "status-"+vp.name+".png")
			}
			if err := os.WriteFile(path, png, 0o644); err != nil {
				t.Fatal(err)
			}
			t.Logf("screenshot: %s (%d bytes)", path, len(png))
		})
	}
	mu.Lock()
	defer mu.Unlock()
	for _, p := range problems {
		t.Errorf("browser reported %s", p)
	}
}
