// Command tracelift is the desktop app: it opens on the embedded demo
// printout (or the image named on the command line) and lets a person
// check, correct, measure and export the tracing.
//
//	tracelift [--screenshot PATH] [--quit-after 8s] [--compare-with EARLIER] [IMAGE]
//
// --compare-with sets an earlier tracing (a picture, a record file or a
// JSON written by tracelift-cli) beside the printout once it is read, as
// File ▸ Compare with earlier tracing does. --screenshot writes the
// window as a PNG once the printout is shown (the comparison window once
// it is shown, with --compare-with);
// --quit-after closes the app after the given time, or as soon as the
// screenshot is written when both are given (for the smoke test under a
// virtual display). Exit status: 0 done, 1 the screenshot failed, 2 usage,
// 3 the printout could not be read.
package main

import (
	"flag"
	"fmt"
	"image"
	"image/png"
	"os"
	"os/exec"
	"strings"
	"time"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/app"

	"tracelift/gui"
	"tracelift/gui/engine"
)

func main() {
	shot := flag.String("screenshot", "", "write the window to this PNG once the printout is shown")
	quitAfter := flag.Duration("quit-after", 0, "quit after this long (0 = stay open)")
	earlier := flag.String("compare-with", "", "set this earlier tracing beside the printout once it is read")
	flag.Usage = func() {
		fmt.Fprintf(os.Stderr, "usage: tracelift [--screenshot PATH] [--quit-after 8s] [--compare-with EARLIER] [IMAGE]\n")
		flag.PrintDefaults()
	}
	flag.Parse()
	if flag.NArg() > 1 {
		flag.Usage()
		os.Exit(2)
	}
	demo, err := engine.Demo()
	if err != nil {
		fmt.Fprintln(os.Stderr, "tracelift:", err)
	}
	a := app.NewWithID("org.tracelift.desktop")
	c := gui.NewController(a, &engine.Backend{}, demo)
	code := 0
	if *earlier != "" {
		asked := false
		c.OnLoaded = func(err error) {
			if err != nil || asked {
				return
			}
			asked = true
			c.CompareWith(*earlier)
		}
	}
	if *shot != "" {
		done := false
		onShown := func(err error) {
			if done {
				return
			}
			done = true
			if err != nil {
				fmt.Fprintln(os.Stderr, "tracelift: reading failed:", err)
				code = 3
			}
			go func() {
				time.Sleep(2 * time.Second) // let the window paint
				win, pattern := c.Window(), "^tracelift"
				if cw := c.ComparisonWindow(); cw != nil && *earlier != "" {
					win, pattern = cw, "^tracelift .* comparison"
				}
				err := writePNG(*shot, win, pattern)
				fyne.Do(func() {
					if err != nil {
						fmt.Fprintln(os.Stderr, "tracelift:", err)
						code = 1
					}
					if *quitAfter > 0 { // the picture is taken: no need to wait longer
						a.Quit()
					}
				})
			}()
		}
		if *earlier != "" {
			compareOnLoaded := c.OnLoaded
			c.OnLoaded = func(err error) {
				if err != nil {
					onShown(err)
					return
				}
				compareOnLoaded(nil)
			}
			c.OnCompared = onShown
		} else {
			c.OnLoaded = onShown
		}
	}
	if *quitAfter > 0 {
		go func() {
			time.Sleep(*quitAfter)
			fyne.Do(a.Quit)
		}()
	}
	c.Window().SetMaster()
	c.Window().Show()
	if flag.NArg() == 1 {
		c.OpenPath(flag.Arg(0))
	} else if err == nil {
		c.ShowDemo()
	}
	a.Run()
	os.Exit(code)
}

// writePNG saves the window. Under X it asks ImageMagick's import for the
// window whose title matches pattern, found by xdotool (the GL read-back of Canvas().Capture() comes
// back blank on some software renderers, Xvfb's among them); without those
// tools it falls back to Capture.
func writePNG(path string, w fyne.Window, pattern string) error {
	if os.Getenv("DISPLAY") != "" {
		if _, err := exec.LookPath("import"); err == nil {
			out, err := exec.Command("xdotool", "search", "--name", pattern).Output()
			if ids := strings.Fields(string(out)); err == nil && len(ids) > 0 {
				if err := exec.Command("import", "-window", ids[len(ids)-1], path).Run(); err == nil {
					return nil
				}
			}
		}
	}
	var img image.Image
	fyne.DoAndWait(func() { img = w.Canvas().Capture() })
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := png.Encode(f, img); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}
