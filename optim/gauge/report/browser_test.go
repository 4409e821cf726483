package report_test

import (
	"bytes"
	"context"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"testing"
	"time"
)

// chromium returns the browser binary named by RHOMB_CHROMIUM, skipping
// the test without one, or failing it when RHOMB_CHROMIUM_REQUIRED is set
// (as .ci/report-check sets it, so CI never passes by skipping).
func chromium(t *testing.T) string {
	bin := os.Getenv("RHOMB_CHROMIUM")
	if bin == "" {
		if os.Getenv("RHOMB_CHROMIUM_REQUIRED") != "" {
			t.Fatal("RHOMB_CHROMIUM_REQUIRED is set but RHOMB_CHROMIUM names no browser")
		}
		t.Skip("set RHOMB_CHROMIUM to a chromium binary to run the browser test (bash .ci/report-check does)")
	}
	return bin
}

// headless runs the browser on the page with flags that keep it from
// reaching the network on its own (updates, sync, safe browsing lists),
// and with every host name resolving to nothing, so that a page that
// tried to fetch anything would log a failed request rather than quietly
// succeed. It returns standard output.
func headless(t *testing.T, bin, profile string, args ...string) []byte {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	base := []string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
		"--disable-component-update", "--disable-sync", "--no-first-run", "--disable-extensions",
		"--host-resolver-rules=MAP * ~NOTFOUND", "--user-data-dir=" + profile}
	cmd := exec.CommandContext(ctx, bin, append(base, args...)...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		t.Fatalf("%s: %v\n%s", bin, err, errb.Bytes())
	}
	return out.Bytes()
}

var checkAttr = regexp.MustCompile(`<body[^>]*data-check="([^"]*)"`)

// The report opens in a real browser (Debian's chromium, headless)
// without script or resource errors, and every figure decodes and has a
// non-zero laid-out size: the page's own load-time check writes its
// finding into the body's data-check attribute, which --dump-dom shows
// after the load event. Then a screenshot of the whole page is taken and
// checked to be mostly not blank; RHOMB_REPORT_KEEP=DIR keeps the page
// and the screenshot there for a person to look at.
func TestBrowser(t *testing.T) {
	bin := chromium(t)
	r, page := demoReport(t)
	dir := t.TempDir()
	path := filepath.Join(dir, "report.html")
	if err := os.WriteFile(path, page, 0o644); err != nil {
		t.Fatal(err)
	}
	url := "file://" + path
	dom := headless(t, bin, filepath.Join(dir, "profile"), "--dump-dom", url)
	m := checkAttr.FindSubmatch(dom)
	if m == nil {
		t.Fatalf("no data-check attribute in the dumped page (%d bytes): the page's script did not run", len(dom))
	}
	want := "figures=7 bad=0 errors=0"
	if string(m[1]) != want {
		t.Errorf("the page's check says %q; want %q", m[1], want)
	}
	if !bytes.Contains(dom, []byte(r.Title)) {
		t.Error("the dumped page lacks the report's title")
	}

	// 1100 pixels is a laptop window's width; the height takes in the
	// whole page (about 6,700 CSS pixels with the per-epoch table closed).
	shot := filepath.Join(dir, "screenshot.png")
	headless(t, bin, filepath.Join(dir, "profile2"), "--hide-scrollbars", "--window-size=1100,7600", "--screenshot="+shot, url)
	b, err := os.ReadFile(shot)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}
	// A blank page has no ink; this page measured about 12 % non-white
	// pixels when the test was written (text, curves, tinted tables and
	// boxes; the figures' own backgrounds are white). 5 % is a floor well
	// under that and well over blank.
	if f := ink(img); f < 0.05 {
		t.Errorf("the screenshot is %.1f%% non-white: the page looks blank", 100*f)
	}
	if keep := os.Getenv("RHOMB_REPORT_KEEP"); keep != "" {
		if err := os.MkdirAll(keep, 0o755); err != nil {
			t.Fatal(err)
		}
		for name, data := range map[string][]byte{"report.html": page, "screenshot.png": b} {
			if err := os.WriteFile(filepath.Join(keep, name), data, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		t.Logf("screenshot %.1f%% non-white", 100*ink(img))
		t.Logf("kept the report and its screenshot in %s", keep)
	}
}

// ink is the fraction of pixels that are not near-white.
func ink(img image.Image) float64 {
	b := img.Bounds()
	n := 0
	for y := b.Min.Y; y < b.Max.Y; y += 2 {
		for x := b.Min.X; x < b.Max.X; x += 2 {
			r, g, bl, _ := img.At(x, y).RGBA()
			if r < 0xF000 || g < 0xF000 || bl < 0xF000 {
				n++
			}
		}
	}
	return float64(n) / float64((b.Dx()+1)/2*((b.Dy()+1)/2))
}
