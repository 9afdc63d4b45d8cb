package review

import (
	"context"
	"flag"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/emulation"
	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"

	"github.com/failframe/failframe/report/internal/browsertest"
	"github.com/failframe/failframe/tracking/marks"
)

var screenshotDir = flag.String("screenshots", "", "folder to save screenshots of the review page into (TestReviewScreenshots)")

// newBrowser starts Debian's headless Chromium for one test.
func newBrowser(t *testing.T) context.Context {
	t.Helper()
	path, err := exec.LookPath("chromium")
	if err != nil {
		if _, err := os.Stat("/usr/bin/chromium"); err != nil {
			t.Skip("chromium is not installed (apt-get install chromium): the browser tests need it")
		}
		path = "/usr/bin/chromium"
	}
	opts := append(browsertest.AllocatorOptions(path, t.TempDir()), chromedp.WindowSize(1400, 900))
	actx, cancelA := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancelC := chromedp.NewContext(actx)
	t.Cleanup(func() {
		cancelC()
		cancelA()
	})
	if err := chromedp.Do(ctx); err != nil {
		t.Fatalf("start chromium: %v", err)
	}
	return ctx
}

// do runs browser steps with a time limit.
func do(t *testing.T, ctx context.Context, what string, steps ...chromedp.Action[chromedp.Void]) {
	t.Helper()
	c, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	if err := chromedp.Do(c, steps...); err != nil {
		t.Fatalf("%s: %v", what, err)
	}
}

func eval[T any](t *testing.T, ctx context.Context, js string) T {
	t.Helper()
	c, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	v, err := chromedp.Run(c, chromedp.Evaluate[T](js))
	if err != nil {
		t.Fatalf("evaluate %s: %v", js, err)
	}
	return v
}

// waitFrame waits until the page shows frame n.
func waitFrame(t *testing.T, ctx context.Context, n int) {
	t.Helper()
	js := fmt.Sprintf(`document.getElementById("frameImg").dataset.frame === "%d" && document.getElementById("frameNo").value === "%d"`, n, n)
	c, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	if _, err := chromedp.Run(c, chromedp.Poll[chromedp.Void](js)); err != nil {
		shown := eval[string](t, ctx, `document.getElementById("frameImg").dataset.frame + " / " + document.getElementById("frameNo").value`)
		t.Fatalf("page does not show frame %d (shows %s): %v", n, shown, err)
	}
}

// imageSignature hashes the pixels of the image on the page.
const imageSignature = `(() => {
  const i = document.getElementById("frameImg");
  const c = document.createElement("canvas");
  c.width = i.naturalWidth; c.height = i.naturalHeight;
  const x = c.getContext("2d");
  x.drawImage(i, 0, 0);
  const d = x.getImageData(0, 0, c.width, c.height).data;
  let s = 0;
  for (let k = 0; k < d.length; k += 4) s = (s * 31 + d[k] + 7 * d[k + 1]) >>> 0;
  return s;
})()`

type rect struct{ Left, Top, Width, Height float64 }

func rectOf(t *testing.T, ctx context.Context, id string) rect {
	return eval[rect](t, ctx, fmt.Sprintf(`(() => { const r = document.getElementById(%q).getBoundingClientRect();
	  return {Left: r.left, Top: r.top, Width: r.width, Height: r.height}; })()`, id))
}

func TestReviewPageInChromium(t *testing.T) {
	dir := t.TempDir()
	const frames = 90
	sr := makeSynthReview(t, dir, 320, 240, frames)
	fps := sr.truth.CaptureFPS
	mk := filepath.Join(dir, "new.marks.yaml")
	srv, base := startServer(t, Config{Clip: sr.clip, Marks: mk, Report: sr.report, CaptureFPS: fps})
	ctx := newBrowser(t)

	do(t, ctx, "open page", chromedp.Navigate(base))
	waitFrame(t, ctx, 0)
	sig0 := eval[uint32](t, ctx, imageSignature)

	// Stepping: buttons and keys.
	do(t, ctx, "step +1", chromedp.Click(chromedp.CSS(`[data-step="1"]`)))
	waitFrame(t, ctx, 1)
	if sig1 := eval[uint32](t, ctx, imageSignature); sig1 == sig0 {
		t.Error("the image did not change from frame 0 to frame 1")
	}
	do(t, ctx, "shift+right", chromedp.KeyEvent(kb.ArrowRight, chromedp.KeyModifiers(chromedp.ModifierShift)))
	waitFrame(t, ctx, 11)
	do(t, ctx, "left", chromedp.KeyEvent(kb.ArrowLeft))
	waitFrame(t, ctx, 10)
	do(t, ctx, "step +10", chromedp.Click(chromedp.CSS(`[data-step="10"]`)))
	waitFrame(t, ctx, 20)
	do(t, ctx, "step +100 past the end", chromedp.Click(chromedp.CSS(`[data-step="100"]`)))
	waitFrame(t, ctx, frames-1)
	do(t, ctx, "page up", chromedp.KeyEvent(kb.PageUp))
	waitFrame(t, ctx, 0)

	// Jump to the break from the event list; time and load follow.
	brk := sr.truth.BreakFrame
	do(t, ctx, "event", chromedp.Click(chromedp.CSS(fmt.Sprintf(`#events li[data-frame="%d"]`, brk))))
	waitFrame(t, ctx, brk)
	tBrk := float64(brk) / fps
	if got, want := eval[string](t, ctx, `document.getElementById("timeLabel").textContent`), fmt.Sprintf("t = %.2f ms", 1000*tBrk); got != want {
		t.Errorf("time label %q, want %q", got, want)
	}
	g, ok := srv.load.at(tBrk)
	if !ok {
		t.Fatalf("no load at the break (%.4f s)", tBrk)
	}
	if got, want := eval[string](t, ctx, `document.getElementById("loadLabel").textContent`), fmt.Sprintf("load %.0f g", g); got != want {
		t.Errorf("load label %q, want %q", got, want)
	}
	if n := eval[int](t, ctx, `document.querySelectorAll("#ticks span").length`); n != 3 {
		t.Errorf("%d event ticks on the scrubber, want 3", n)
	}
	if href := eval[string](t, ctx, `(document.querySelector("#summary a") || {}).href || ""`); href != base+"files/report.html" {
		t.Errorf("link to the full report %q", href)
	}
	do(t, ctx, "next event key", chromedp.KeyEvent("e"))
	waitFrame(t, ctx, sr.truth.CollapseFrame)

	// Clicking the chart jumps to that time.
	ch := rectOf(t, ctx, "chart")
	tEnd := float64(frames-1) / fps
	cx := math.Round(ch.Left + 52 + 0.25*(ch.Width-62))
	wantFrame := int(math.Round((cx - ch.Left - 52) / (ch.Width - 62) * tEnd * fps))
	do(t, ctx, "chart click", chromedp.MouseClickXY(cx, ch.Top+40))
	waitFrame(t, ctx, wantFrame)

	// Overlays: the tracked points and members are drawn, and the toggles hide them.
	const inked = `(() => { const c = document.getElementById("overlay");
	  const d = c.getContext("2d").getImageData(0, 0, c.width, c.height).data;
	  let n = 0; for (let k = 3; k < d.length; k += 4) if (d[k] > 0) n++; return n; })()`
	on := eval[int](t, ctx, inked)
	do(t, ctx, "hide overlays", chromedp.Click(chromedp.ID("ovPoints")), chromedp.Click(chromedp.ID("ovMembers")))
	if off := eval[int](t, ctx, inked); on < 500 || off != 0 {
		t.Errorf("overlay pixels: %d with overlays on, %d with them off", on, off)
	}
	do(t, ctx, "show overlays", chromedp.Click(chromedp.ID("ovPoints")), chromedp.Click(chromedp.ID("ovMembers")))

	// A still of this frame goes to the report's evidence folder.
	do(t, ctx, "still", chromedp.Click(chromedp.ID("stillBtn")))
	c, cancel := context.WithTimeout(ctx, 20*time.Second)
	_, err := chromedp.Run(c, chromedp.Poll[chromedp.Void](`document.getElementById("status").textContent.startsWith("still saved")`))
	cancel()
	if err != nil {
		t.Errorf("still not saved: %v", err)
	} else if _, err := os.Stat(filepath.Join(sr.report, "evidence", fmt.Sprintf("review-frame-%06d.png", wantFrame))); err != nil {
		t.Errorf("still file: %v", err)
	}

	// Play at 50 times slower than real time, then pause.
	start := wantFrame
	do(t, ctx, "play", chromedp.SetValue(chromedp.ID("slowdown"), "50"), chromedp.KeyEvent(" "))
	c, cancel = context.WithTimeout(ctx, 20*time.Second)
	_, err = chromedp.Run(c, chromedp.Poll[chromedp.Void](fmt.Sprintf(`Number(document.getElementById("frameImg").dataset.frame) >= %d`, start+5)))
	cancel()
	if err != nil {
		t.Errorf("playing did not advance 5 frames: %v", err)
	}
	do(t, ctx, "pause", chromedp.KeyEvent(" "))
	if got := eval[string](t, ctx, `document.getElementById("playBtn").textContent`); got != "Play" {
		t.Errorf("after pausing the button says %q", got)
	}

	// Marking: three points placed by clicking on frame 30.
	do(t, ctx, "go to 30", chromedp.SetValue(chromedp.ID("frameNo"), "30"),
		chromedp.Evaluate[chromedp.Void](`document.getElementById("frameNo").dispatchEvent(new Event("change"))`))
	waitFrame(t, ctx, 30)
	do(t, ctx, "start marking", chromedp.Click(chromedp.ID("markToggle")))
	ov := rectOf(t, ctx, "overlay")
	s := ov.Width / float64(sr.truth.Width)
	if s < 1.5 {
		t.Fatalf("frame shown at scale %.2f; the test wants it enlarged", s)
	}
	targets := [][2]float64{{60.3, 199.6}, {140.2, 120.7}, {219.9, 40.1}}
	var clicks, want [][2]float64
	for _, p := range targets {
		x, y := math.Round(ov.Left+(p[0]+0.5)*s), math.Round(ov.Top+(p[1]+0.5)*s)
		clicks = append(clicks, [2]float64{x, y})
		// OpenCV convention: pixel centres on integers (see the package doc).
		want = append(want, [2]float64{(x-ov.Left)/s - 0.5, (y-ov.Top)/s - 0.5})
		do(t, ctx, "place point", chromedp.MouseClickXY(x, y))
	}
	if n := eval[int](t, ctx, `document.querySelectorAll("#pointTable tbody tr").length`); n != 3 {
		t.Fatalf("%d points in the table after three clicks", n)
	}

	// Refine the third point in the loupe (10 loupe px per image px).
	do(t, ctx, "leave the frame", chromedp.MouseEvent(chromedp.MouseMoved, 5, 5))
	lp := rectOf(t, ctx, "loupe")
	lx, ly := math.Round(lp.Left+lp.Width/2+7), math.Round(lp.Top+lp.Height/2-4)
	do(t, ctx, "loupe click", chromedp.MouseEvent(chromedp.MouseMoved, lx, ly), chromedp.MouseClickXY(lx, ly))
	want[2][0] += ((lx-lp.Left)*200/lp.Width - 100) / 10
	want[2][1] += ((ly-lp.Top)*200/lp.Height - 100) / 10

	// Nudge the second point down by 2 x 0.1 px from the keyboard.
	do(t, ctx, "nudge", chromedp.MouseClickXY(clicks[1][0], clicks[1][1]),
		chromedp.KeyEvent(kb.ArrowDown, chromedp.KeyModifiers(chromedp.ModifierAlt)),
		chromedp.KeyEvent(kb.ArrowDown, chromedp.KeyModifiers(chromedp.ModifierAlt)))
	want[1][1] += 0.2
	if fr := eval[string](t, ctx, `document.getElementById("frameNo").value`); fr != "30" {
		t.Errorf("nudging moved the frame to %s", fr)
	}

	// Name the first point A1, give the tower block and derive its place.
	do(t, ctx, "select first", chromedp.MouseClickXY(clicks[0][0], clicks[0][1]))
	do(t, ctx, "rename and tower", chromedp.Evaluate[chromedp.Void](`(() => {
		const set = (id, v) => { const e = document.getElementById(id); e.value = v; e.dispatchEvent(new Event("change")); };
		set("ptId", "A1"); set("twBase", "100"); set("twTop", "60"); set("twHeight", "300"); set("twLevels", "0, 75, 150, 225, 300");
	})()`), chromedp.Click(chromedp.ID("ptDerive")))
	// Join it with the second point into a brace.
	do(t, ctx, "choose two",
		chromedp.MouseClickXY(clicks[0][0], clicks[0][1], chromedp.ButtonModifiers(chromedp.ModifierShift)),
		chromedp.MouseClickXY(clicks[1][0], clicks[1][1], chromedp.ButtonModifiers(chromedp.ModifierShift)),
		chromedp.SetValue(chromedp.ID("memId"), "AB-d1"),
		chromedp.Click(chromedp.ID("joinBtn")))
	// Scale from the first and third points.
	do(t, ctx, "scale", chromedp.Evaluate[chromedp.Void](`(() => {
		document.getElementById("scFrom").value = "A1";
		document.getElementById("scTo").value = "P3";
		document.getElementById("scMM").value = "120";
	})()`), chromedp.Click(chromedp.ID("scSet")))
	if n := eval[int](t, ctx, `document.querySelectorAll("#memberList li").length`); n != 1 {
		t.Fatalf("%d members after joining, want 1; status %q", n, eval[string](t, ctx, `document.getElementById("status").textContent`))
	}
	do(t, ctx, "save", chromedp.KeyEvent("s", chromedp.KeyModifiers(chromedp.ModifierCtrl)))
	c, cancel = context.WithTimeout(ctx, 20*time.Second)
	_, err = chromedp.Run(c, chromedp.Poll[chromedp.Void](`document.body.dataset.saved`))
	cancel()
	if err != nil {
		t.Fatalf("marks not saved: %v; status %q", err, eval[string](t, ctx, `document.getElementById("status").textContent`))
	}

	m, err := marks.Load(mk)
	if err != nil {
		t.Fatalf("saved marks do not load: %v", err)
	}
	if err := m.CheckBounds(sr.truth.Width, sr.truth.Height); err != nil {
		t.Error(err)
	}
	if m.ReferenceFrame != 30 || len(m.Points) != 3 || m.CaptureFPS != fps {
		t.Fatalf("saved marks: reference frame %d, %d points, %g fps; want 30, 3, %g", m.ReferenceFrame, len(m.Points), m.CaptureFPS, fps)
	}
	for i, p := range m.Points {
		if d := math.Hypot(p.PX[0]-want[i][0], p.PX[1]-want[i][1]); d > 0.5 {
			t.Errorf("point %s at %v, clicked at %v (%.3f px off)", p.ID, p.PX, want[i], d)
		}
		// The page keeps 3 decimals; anything more than rounding is a mistake.
		if d := math.Hypot(p.PX[0]-want[i][0], p.PX[1]-want[i][1]); d > 0.002 {
			t.Errorf("point %s at %v, expected %v exactly (%.4f px off)", p.ID, p.PX, want[i], d)
		}
	}
	a1 := m.Points[0]
	if a1.ID != "A1" || a1.Leg != "A" || a1.Level == nil || *a1.Level != 1 || a1.PlanMM == nil {
		t.Fatalf("first point %+v, want A1 on leg A at level 1 with a plan position", a1)
	}
	// The page's derived plan position must agree with marks.PlanOf.
	bare := a1
	bare.PlanMM = nil
	if pl, ok := m.PlanOf(bare); !ok || math.Abs(pl[0]-a1.PlanMM[0]) > 1e-3 || math.Abs(pl[1]-a1.PlanMM[1]) > 1e-3 {
		t.Errorf("page derived plan %v, marks.PlanOf gives %v", *a1.PlanMM, pl)
	}
	if len(m.Members) != 1 || m.Members[0].ID != "AB-d1" || m.Members[0].Kind != "brace" ||
		len(m.Members[0].Points) != 2 || m.Members[0].Points[0] != "A1" || m.Members[0].Points[1] != m.Points[1].ID {
		t.Errorf("members %+v, want brace AB-d1 joining A1 and %s", m.Members, m.Points[1].ID)
	}

	if m.Scale == nil || m.Scale.From != "A1" || m.Scale.To != "P3" || m.Scale.MM != 120 {
		t.Errorf("scale %+v, want A1 to P3 = 120 mm", m.Scale)
	} else if mmpx, _ := m.MMPerPixel(); math.Abs(mmpx-120/math.Hypot(want[0][0]-want[2][0], want[0][1]-want[2][1])) > 1e-3 {
		t.Errorf("scale %g mm/px, want %g", mmpx, 120/math.Hypot(want[0][0]-want[2][0], want[0][1]-want[2][1]))
	}

	// Reopening shows the same marks.
	do(t, ctx, "reload", chromedp.Navigate(base))
	waitFrame(t, ctx, 0)
	c, cancel = context.WithTimeout(ctx, 20*time.Second)
	_, err = chromedp.Run(c, chromedp.Poll[chromedp.Void](`document.querySelectorAll("#pointTable tbody tr").length === 3 &&
		document.querySelectorAll("#memberList li").length === 1 && document.getElementById("refFrame").textContent === "30"`))
	cancel()
	if err != nil {
		t.Errorf("the reopened page does not show the saved marks: %v", err)
	}

	// A marks file broken by hand is never overwritten from the page.
	broken := "points:\n  - id: A\n    px: [1, 1]\n  - id: A\n    px: [2, 2]\n"
	write(t, mk, broken)
	do(t, ctx, "reload broken", chromedp.Navigate(base))
	waitFrame(t, ctx, 0)
	do(t, ctx, "try to save", chromedp.KeyEvent("s", chromedp.KeyModifiers(chromedp.ModifierCtrl)),
		chromedp.Poll[chromedp.Void](`document.getElementById("status").textContent.includes("fix or move it")`))
	if !eval[bool](t, ctx, `document.getElementById("saveMarks").disabled`) {
		t.Error("save stays enabled over a marks file that could not be read")
	}
	if b, _ := os.ReadFile(mk); string(b) != broken {
		t.Error("the page overwrote a marks file it could not read")
	}
}

// TestReviewScreenshots saves screenshots of the page in a few states into
// the folder given with -screenshots (make screenshots).
func TestReviewScreenshots(t *testing.T) {
	if *screenshotDir == "" {
		t.Skip("no -screenshots folder given")
	}
	if err := os.MkdirAll(*screenshotDir, 0o755); err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	sr := makeSynthReview(t, dir, 640, 480, 240)
	srv, base := startServer(t, Config{Clip: sr.clip, Marks: sr.marks, Report: sr.report})
	ctx := newBrowser(t)
	shot := func(name string) {
		t.Helper()
		c, cancel := context.WithTimeout(ctx, 20*time.Second)
		defer cancel()
		png, err := chromedp.Run(c, chromedp.CaptureScreenshot())
		if err != nil {
			t.Fatal(err)
		}
		p := filepath.Join(*screenshotDir, name)
		if err := os.WriteFile(p, png, 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("wrote %s", p)
	}

	do(t, ctx, "open", chromedp.Navigate(base))
	waitFrame(t, ctx, 0)
	do(t, ctx, "labels", chromedp.Click(chromedp.ID("ovLabels")))
	brk := sr.truth.BreakFrame
	do(t, ctx, "event", chromedp.Click(chromedp.CSS(fmt.Sprintf(`#events li[data-frame="%d"]`, brk))))
	waitFrame(t, ctx, brk)
	do(t, ctx, "step", chromedp.KeyEvent(kb.ArrowRight), chromedp.KeyEvent(kb.ArrowRight))
	waitFrame(t, ctx, brk+2)
	shot("1-after-break.png")

	do(t, ctx, "marking", chromedp.Click(chromedp.ID("markToggle")))
	waitFrame(t, ctx, 0)
	ov := rectOf(t, ctx, "overlay")
	s := ov.Width / float64(sr.truth.Width)
	p := srv.analysed.Points[2]
	x, y := ov.Left+(p.PX[0]+0.5)*s, ov.Top+(p.PX[1]+0.5)*s
	do(t, ctx, "select and hover", chromedp.MouseClickXY(x, y), chromedp.MouseEvent(chromedp.MouseMoved, x+2, y+1))
	shot("2-marking.png")

	do(t, ctx, "stop marking", chromedp.Click(chromedp.ID("markToggle")),
		chromedp.Evaluate[chromedp.Void](`document.getElementById("markBox").open = false; document.getElementById("eventsBox").open = false; document.getElementById("keysBox").open = true`))
	do(t, ctx, "collapse", chromedp.KeyEvent(kb.End))
	waitFrame(t, ctx, sr.truth.Frames-1)
	shot("3-end-and-keys.png")

	// A small laptop window.
	do(t, ctx, "small window", chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
		_, err := cdp.Call(ctx, tg, emulation.SetDeviceMetricsOverride, emulation.SetDeviceMetricsOverrideParams{Width: 1024, Height: 640, DeviceScaleFactor: 1})
		return err
	}), chromedp.Evaluate[chromedp.Void](`window.dispatchEvent(new Event("resize")); document.getElementById("eventsBox").open = true`))
	do(t, ctx, "onset", chromedp.Click(chromedp.CSS(fmt.Sprintf(`#events li[data-frame="%d"]`, sr.truth.OnsetFrame))))
	waitFrame(t, ctx, sr.truth.OnsetFrame)
	shot("4-small-window.png")
}
