package review

import (
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/chromedp"

	"ferry/imaging"
	"ferry/landmarks"
	"ferry/register"
	"ferry/register/demo"
	"ferry/register/match"
)

// chromium finds Debian's chromium. Without it the browser test is skipped
// on a developer's machine and fails in CI (CI=true), where .ci/run
// installs it.
func chromium(t *testing.T) string {
	t.Helper()
	for _, p := range []string{"/usr/bin/chromium", "/usr/bin/chromium-browser"} {
		if _, err := os.Stat(p); err == nil {
			return p
		}
	}
	if p, err := exec.LookPath("chromium"); err == nil {
		return p
	}
	if os.Getenv("CI") == "true" {
		t.Fatal("chromium is not installed: .ci/run installs Debian's chromium before the tests")
	}
	t.Skip("chromium is not installed (apt-get install chromium); CI runs this test")
	return ""
}

// demoSession runs the demo into a temporary folder and opens a review of
// its files, as `ferry review` with the command the demo prints.
func demoSession(t testing.TB) (*Session, string) {
	t.Helper()
	dir := t.TempDir()
	out, err := demo.Run(context.Background(), demo.Options{Dir: dir, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	f := out.Files
	tf, err := register.ReadRegistrationFile(f.Transform)
	if err != nil {
		t.Fatal(err)
	}
	cells, pos, err := register.ReadCells(f.Cells, "cells", tf, false)
	if err != nil {
		t.Fatal(err)
	}
	cands, candPos, err := register.ReadCells(f.Candidates, "candidates", tf, true)
	if err != nil {
		t.Fatal(err)
	}
	mapper, err := register.NewMapper(tf)
	if err != nil {
		t.Fatal(err)
	}
	ms, err := match.ReadMatchesTable(f.Matches)
	if err != nil {
		t.Fatal(err)
	}
	src, err := imaging.OpenVolume(f.SourceStack)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { src.Close() })
	dst, err := imaging.OpenVolume(f.EMStack)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { dst.Close() })
	sd := f.CellSD
	decisions := filepath.Join(dir, "decisions.csv")
	s, err := NewSession(Inputs{Transform: tf, Mapper: mapper, Cells: cells, CellPos: pos, CellSD: &sd,
		Candidates: cands, CandidatePos: candPos, Matches: ms, MatchesPath: f.Matches,
		Source: src, Target: dst, SourceVoxel: f.SourceVoxel, TargetVoxel: f.EMVoxel,
		DecisionsPath: decisions})
	if err != nil {
		t.Fatal(err)
	}
	return s, decisions
}

// The page in a real browser: accept one cell, pick another candidate for
// the second, say "no counterpart" for the third, reload; the decisions file
// holds exactly those rows and the page resumes at the fourth. The page
// never asks anything of a server but its own.
func TestReviewInBrowser(t *testing.T) {
	exe := chromium(t)
	s, decisionsPath := demoSession(t)
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	base := "http://" + ln.Addr().String()
	ctx, stop := context.WithCancel(context.Background())
	served := make(chan error, 1)
	go func() { served <- Serve(ctx, ln, s) }()
	defer func() {
		stop()
		if err := <-served; err != nil {
			t.Errorf("serve: %v", err)
		}
	}()

	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(exe),
		chromedp.Flag("headless", true),
		chromedp.Flag("no-sandbox", true),
		chromedp.Flag("disable-gpu", true),
		chromedp.Flag("disable-quic", true),
		chromedp.Flag("no-first-run", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1400, 900),
	}
	alloc, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	defer cancelAlloc()
	browser, cancelBrowser := chromedp.NewContext(alloc)
	defer cancelBrowser()

	var mu sync.Mutex
	var requests []string
	if err := chromedp.Listen(browser, func(ev any) {
		if e, ok := ev.(*network.EventRequestWillBeSent); ok {
			mu.Lock()
			requests = append(requests, e.Request.URL)
			mu.Unlock()
		}
	}); err != nil {
		t.Fatal(err)
	}
	st := s.State()
	if len(st.Order) < 4 {
		t.Fatalf("%d cells to review", len(st.Order))
	}
	// at waits for the page to show place k, all four panels drawn, and
	// fails when the page reports an error.
	at := func(k int) chromedp.Action[chromedp.Void] {
		return chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
			if _, err := chromedp.WaitVisible(chromedp.CSS(`body[data-place="`+strconv.Itoa(k)+`"] #em-xz svg`))(ctx, tg); err != nil {
				return err
			}
			msg, err := chromedp.Evaluate[string](`document.getElementById("message").textContent`)(ctx, tg)
			if err != nil {
				return err
			}
			if msg != "" {
				return fmt.Errorf("place %d: the page says %q", k, msg)
			}
			return nil
		})
	}
	// The browser starts with the first action; the timeout is set on
	// the context of the later ones only (see chromedp.Run).
	if err := chromedp.Do(browser, chromedp.Navigate(base+"/")); err != nil {
		t.Fatal(err)
	}
	steps, cancelSteps := context.WithTimeout(browser, 90*time.Second)
	defer cancelSteps()
	if err := chromedp.Do(steps, at(0)); err != nil {
		t.Fatal(err)
	}
	proposed0, err := chromedp.Run(steps, chromedp.Evaluate[string](`fetch("/api/cell?k=0").then(r => r.json()).then(c => c.proposed)`, chromedp.EvalAwaitPromise))
	if err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(steps, chromedp.Click(chromedp.ID("accept")), at(1)); err != nil {
		t.Fatal(err)
	}
	other1, err := chromedp.Run(steps, chromedp.Evaluate[string](`(() => {
		const b = document.querySelector('#choices button:not(.proposed):not(.none):not([disabled])');
		if (!b) return "";
		const id = b.querySelector("code").textContent;
		b.click();
		return id;
	})()`))
	if err != nil {
		t.Fatal(err)
	}
	// A reload stays at the fourth cell, and so does a fresh visit without
	// the page's #cell= link: that one resumes from the decisions file.
	if err := chromedp.Do(steps, at(2), chromedp.Click(chromedp.ID("none")), at(3), chromedp.Reload(), at(3),
		chromedp.Navigate("about:blank"), chromedp.Navigate(base+"/"), at(3)); err != nil {
		t.Fatal(err)
	}
	if proposed0 == "" || other1 == "" {
		t.Fatalf("the first cell proposes %q, the second offers %q: the demo's order changed", proposed0, other1)
	}
	if dir := os.Getenv("FERRY_UPDATE_SCREENSHOTS"); dir != "" {
		takeScreenshots(t, steps, base, dir)
	}

	set, err := landmarks.ReadDecisions(decisionsPath)
	if err != nil {
		t.Fatal(err)
	}
	want := []struct {
		id, cand string
		v        landmarks.Verdict
	}{{st.Order[0], proposed0, landmarks.Accepted}, {st.Order[1], other1, landmarks.Accepted}, {st.Order[2], "", landmarks.NoCounterpart}}
	if len(set.Decisions) != len(want) {
		t.Fatalf("%d decisions, want %d: %+v", len(set.Decisions), len(want), set.Decisions)
	}
	for i, w := range want {
		d := set.Decisions[i]
		if d.ID != w.id || d.Candidate != w.cand || d.Verdict != w.v || d.DecidedAt == "" {
			t.Errorf("decision %d: %+v, want %s %q %s", i, d, w.id, w.cand, w.v)
		}
	}
	if _, err := match.ResolveDecisions(set, s.in.Cells, s.in.Candidates); err != nil {
		t.Error(err)
	}
	mu.Lock()
	defer mu.Unlock()
	if len(requests) < 10 {
		t.Errorf("only %d requests seen", len(requests))
	}
	for _, u := range requests {
		if !strings.HasPrefix(u, base+"/") && !strings.HasPrefix(u, "data:") {
			t.Errorf("the page asked for %s, outside its server %s", u, base)
		}
	}
}

// takeScreenshots writes the page at two window sizes into dir (the docs
// folder when FERRY_UPDATE_SCREENSHOTS=docs is run from the repository).
func takeScreenshots(t *testing.T, browser context.Context, base, dir string) {
	if dir == "docs" {
		dir = filepath.Join("..", "..", "docs")
	}
	for _, size := range []struct {
		name string
		w, h int64
	}{{"review-wide.png", 1400, 900}, {"review-narrow.png", 760, 1100}} {
		err := chromedp.Do(browser,
			chromedp.EmulateViewport(size.w, size.h),
			chromedp.Navigate(base+"/"),
			chromedp.WaitVisible(chromedp.CSS(`body[data-place] #cell-id`)),
			chromedp.Sleep(time.Second),
		)
		if err != nil {
			t.Fatal(err)
		}
		png, err := chromedp.Run(browser, chromedp.CaptureScreenshot())
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, size.name), png, 0o644); err != nil {
			t.Fatal(err)
		}
	}
}
