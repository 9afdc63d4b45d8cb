// Package browsertest loads a page in Debian's headless Chromium for tests
// and reports what a reader would see: the text of chosen elements, broken
// images, console errors and any request that leaves the machine.
package browsertest

import (
	"context"
	"fmt"
	"net/url"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	cdplog "github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"
)

// Chromium is the browser used.
const Chromium = "/usr/bin/chromium"

// Page is what the browser saw.
type Page struct {
	// Texts maps each requested element id to its visible text.
	Texts map[string]string
	// Images is the number of images; BrokenImages those that did not decode.
	Images, BrokenImages int
	// Errors are console errors, uncaught exceptions and error log entries.
	Errors []string
	// Outside are requests to anything but file: and data: URLs.
	Outside []string
}

// Load opens the local file path in headless Chromium and reads the text of
// the elements with the given ids. It skips the test when Chromium is absent.
func Load(t *testing.T, path string, ids ...string) *Page {
	t.Helper()
	if _, err := os.Stat(Chromium); err != nil {
		t.Skipf("%s not installed (make deps installs it): %v", Chromium, err)
	}
	opts := AllocatorOptions(Chromium, t.TempDir())
	actx, cancel := chromedp.NewExecAllocator(context.Background(), opts...)
	defer cancel()

	page := &Page{Texts: map[string]string{}}
	var mu sync.Mutex
	listen := func(ev any) {
		mu.Lock()
		defer mu.Unlock()
		switch e := ev.(type) {
		case *runtime.EventConsoleAPICalled:
			if e.Type == runtime.ConsoleAPICalledTypeError || e.Type == runtime.ConsoleAPICalledTypeAssert {
				var parts []string
				for _, a := range e.Args {
					parts = append(parts, string(a.Value))
				}
				page.Errors = append(page.Errors, "console: "+strings.Join(parts, " "))
			}
		case *runtime.EventExceptionThrown:
			page.Errors = append(page.Errors, "exception: "+e.ExceptionDetails.Text)
		case *cdplog.EventEntryAdded:
			if e.Entry.Level == cdplog.EntryLevelError {
				page.Errors = append(page.Errors, "log: "+e.Entry.Text+" "+e.Entry.URL)
			}
		case *network.EventRequestWillBeSent:
			if u, err := url.Parse(e.Request.URL); err != nil || (u.Scheme != "file" && u.Scheme != "data") {
				page.Outside = append(page.Outside, e.Request.URL)
			}
		}
	}
	ctx, cancel2 := chromedp.NewContext(actx, chromedp.WithListener(listen))
	defer cancel2()
	// Start the browser without a timeout, then bound the page's actions.
	if err := chromedp.Do(ctx); err != nil {
		t.Fatalf("chromium: start: %v", err)
	}
	tctx, cancel3 := context.WithTimeout(ctx, 60*time.Second)
	defer cancel3()

	u := (&url.URL{Scheme: "file", Path: path}).String()
	if err := chromedp.Do(tctx, chromedp.Navigate(u), chromedp.WaitReady("body")); err != nil {
		t.Fatalf("chromium: load %s: %v", path, err)
	}
	images, err := chromedp.Run(tctx, chromedp.Evaluate[int](`document.images.length`))
	if err != nil {
		t.Fatalf("chromium: %v", err)
	}
	broken, err := chromedp.Run(tctx, chromedp.Evaluate[int](`Array.from(document.images).filter(i => !(i.complete && i.naturalWidth > 0)).length`))
	if err != nil {
		t.Fatalf("chromium: %v", err)
	}
	texts := make([]string, len(ids))
	for i, id := range ids {
		texts[i], err = chromedp.Run(tctx, chromedp.Evaluate[string](fmt.Sprintf(`(document.getElementById(%q) || {innerText: ""}).innerText`, id)))
		if err != nil {
			t.Fatalf("chromium: text of #%s: %v", id, err)
		}
	}
	// Let late console messages arrive.
	time.Sleep(200 * time.Millisecond)
	mu.Lock()
	defer mu.Unlock()
	for i, id := range ids {
		page.Texts[id] = texts[i]
	}
	page.Images, page.BrokenImages = images, broken
	return page
}

// AllocatorOptions are the flags for a headless Chromium at execPath with a
// fresh profile in userDataDir: no sandbox (tests run as root in CI), no GPU,
// and no background connections (the test machine has no network).
func AllocatorOptions(execPath, userDataDir string) []chromedp.ExecAllocatorOption {
	return []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(execPath),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(userDataDir),
	}
}
