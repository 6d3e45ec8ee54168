package result

import (
	"bytes"
	"context"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"
	"time"
)

// Screenshot sizes of the rendering test: a laptop screen.
const shotW, shotH = 1280, 1600

// report.html renders in headless Chromium to a screenshot of the window
// size that is not blank: a good part of its pixels are not the white
// background, and it holds colours besides black and white (the plots).
// Skipped where Chromium is not installed.
func TestReportRenders(t *testing.T) {
	browser, err := exec.LookPath("chromium")
	if err != nil {
		t.Skip("chromium is not installed: the rendering of report.html is not checked (Debian: apt-get install chromium)")
	}
	r, s := plotsResult(t)
	dir, _ := writeFolder(t, t.TempDir(), "r", r, s)
	shot := filepath.Join(t.TempDir(), "shot.png")
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync", "--user-data-dir="+t.TempDir(),
		"--hide-scrollbars", "--screenshot="+shot, "--window-size="+strconv.Itoa(shotW)+","+strconv.Itoa(shotH), "file://"+filepath.Join(dir, ReportFile))
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("chromium: %v\n%s", err, stderr.String())
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v\n%s", err, stderr.String())
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	if b := img.Bounds(); b.Dx() != shotW || b.Dy() != shotH {
		t.Errorf("screenshot of %d×%d, want %d×%d", b.Dx(), b.Dy(), shotW, shotH)
	}
	inked, coloured := ink(img)
	if inked < 0.02 || coloured < 0.001 {
		t.Errorf("the screenshot looks blank: %.2f%% of the pixels are not white, %.3f%% coloured", 100*inked, 100*coloured)
	}
}

// ink returns the fractions of the pixels of img that are not white and
// that are coloured (not grey).
func ink(img image.Image) (inked, coloured float64) {
	b := img.Bounds()
	var n, nInk, nCol int
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			n++
			if r < 0xF000 || g < 0xF000 || bl < 0xF000 {
				nInk++
			}
			if max(r, g, bl)-min(r, g, bl) > 0x3000 {
				nCol++
			}
		}
	}
	return float64(nInk) / float64(n), float64(nCol) / float64(n)
}
