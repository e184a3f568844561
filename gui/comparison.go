package gui

import (
	"context"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/storage"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"tracelift/gui/engine"
	"tracelift/gui/model"
)

// The files an earlier tracing may be: pictures, record files, our JSON.
var earlierExts = []string{".png", ".jpg", ".jpeg", ".tif", ".tiff", ".pdf", ".hea", ".csv", ".edf", ".json"}

// compareDialog asks for the earlier tracing to set beside the one on
// screen.
func (c *Controller) compareDialog() {
	if _, ok := c.m.Current(); !ok {
		dialog.ShowInformation("Compare with earlier tracing", "Open a tracing and let it be measured first; the earlier one is then set beside it.", c.win)
		return
	}
	d := c.fileDialog(earlierExts, c.CompareWith)
	d.SetTitleText("Choose the earlier tracing (picture, record file or tracelift JSON)")
	if p := c.m.Source().Path; p != "" {
		if u, err := storage.ListerForURI(storage.NewFileURI(filepath.Dir(p))); err == nil {
			d.SetLocation(u)
		}
	}
	d.Resize(fyne.NewSize(900, 600))
	d.Show()
}

// CompareWith reads the earlier tracing at path in the background and
// shows its comparison with the tracing on screen (as corrected) in a
// window of its own.
func (c *Controller) CompareWith(path string) {
	cmp, ok := c.b.(model.Comparer)
	cur, have := c.m.Current()
	name := filepath.Base(path)
	if !ok || !have {
		msg := "There is no measured tracing on screen to compare with."
		if !ok {
			msg = "This build cannot compare tracings."
		}
		c.setStatus(msg)
		if c.OnCompared != nil {
			c.OnCompared(errors.New(msg))
		}
		return
	}
	c.setStatus("Reading the earlier tracing " + name + "…")
	c.progress.SetValue(0)
	c.progress.Show()
	ctx, cancel := context.WithCancel(context.Background())
	c.mu.Lock()
	if c.cmpCancel != nil {
		c.cmpCancel()
	}
	c.cmpCancel = cancel
	c.mu.Unlock()
	c.jobs.Add(1)
	go func() {
		defer c.jobs.Done()
		defer cancel()
		progress := throttled(func(stage string, frac float64) {
			c.progress.SetValue(frac)
			c.setStatus("Reading the earlier tracing " + name + ": " + stage + "…")
		})
		r, err := cmp.CompareWith(ctx, model.Source{Path: path, Name: name}, cur, progress)
		fyne.Do(func() {
			c.progress.Hide()
			if err != nil {
				if errors.Is(err, context.Canceled) {
					return
				}
				c.setStatus("Could not compare with " + name + ".")
				dialog.ShowInformation("Could not compare with "+name, engine.Explain(err).String(), c.win)
				if c.OnCompared != nil {
					c.OnCompared(err)
				}
				return
			}
			c.setStatus(fmt.Sprintf("Compared with %s: %d change(s) raised.", name, len(r.Raised)))
			c.showComparison(r, path)
			if c.OnCompared != nil {
				c.OnCompared(nil)
			}
		})
	}()
}

// throttled hands progress to f on the UI goroutine at most 20 times a
// second.
func throttled(f func(stage string, frac float64)) model.Progress {
	var last int64
	return func(stage string, frac float64) {
		now := nowMillis()
		if now-last < 50 {
			return
		}
		last = now
		fyne.Do(func() { f(stage, frac) })
	}
}

// showComparison opens (or refills) the comparison window: the caution
// first, the two tracings named with their line styles, a likely reversal,
// the overlaid beats on the left, the changes on the right, the print
// button at the foot.
func (c *Controller) showComparison(r *model.Comparison, earlierPath string) {
	if c.cmpWin == nil {
		c.cmpWin = c.app.NewWindow("tracelift — comparison")
		c.cmpWin.SetOnClosed(func() { c.cmpWin = nil })
		c.cmpWin.Resize(fyne.NewSize(1280, 680))
	}
	w := c.cmpWin
	w.SetTitle("tracelift — comparison: " + r.Current + " against " + r.Earlier)

	caution := widget.NewLabel(r.Caution)
	caution.Wrapping = fyne.TextWrapWord
	caution.Importance = widget.WarningImportance
	caution.TextStyle = fyne.TextStyle{Bold: true}
	legend := container.NewHBox(
		lineSwatch(colEarlier, true), widget.NewLabel("A, earlier: "+r.Earlier),
		widget.NewSeparator(),
		lineSwatch(colCurrent, false), widget.NewLabel("B, current: "+r.Current+" (as on screen when compared)"),
	)
	top := container.NewVBox(caution, container.NewHScroll(legend))
	if r.Reversal != "" {
		rev := widget.NewLabel(r.Reversal)
		rev.Wrapping = fyne.TextWrapWord
		rev.Importance = widget.DangerImportance
		rev.TextStyle = fyne.TextStyle{Bold: true}
		top.Add(rev)
	}

	beats := newBeatsView(r.Beats)
	scale := widget.NewLabel("QRS onsets at one time; true scale: 25 mm/s, 10 mm/mV (1 mm squares). Under each lead: the current beat's shift against the earlier one, its gain, their correlation.")
	scale.Wrapping = fyne.TextWrapWord
	scale.TextStyle = fyne.TextStyle{Italic: true}
	left := container.NewBorder(nil, scale, nil, nil, beats)

	list := container.NewVBox()
	list.Add(heading(fmt.Sprintf("Changes raised: %d", len(r.Raised))))
	if len(r.Raised) == 0 {
		list.Add(wrapped("None: no change exceeds both its uncertainty and the threshold for a change worth attention.", widget.MediumImportance, false))
	}
	for _, l := range r.Raised {
		list.Add(wrapped("⚠ "+l.Text, widget.DangerImportance, true))
		list.Add(detail(detailWords(l)))
	}
	if len(r.Listed) > 0 {
		list.Add(widget.NewSeparator())
		list.Add(heading(fmt.Sprintf("Listed, not raised: %d", len(r.Listed))))
		for _, l := range r.Listed {
			list.Add(wrapped("• "+l.Text, widget.MediumImportance, false))
			list.Add(detail(upperFirst(l.Why) + ". " + detailWords(l)))
		}
	}
	list.Add(widget.NewSeparator())
	list.Add(detail(fmt.Sprintf("%d further items within their uncertainty; %d not measured on both tracings. Uncertainties are 90 %% half-widths from both tracings.", r.Within, r.Unmeasured)))
	list.Add(heading("Shift, gain and notes"))
	for _, n := range r.Notes {
		list.Add(wrapped("• "+n, widget.MediumImportance, false))
	}
	right := container.NewVScroll(list)

	split := container.NewHSplit(left, right)
	split.Offset = 0.56
	printBtn := widget.NewButton("Print the comparison…", func() { c.printComparisonDialog(r, earlierPath) })
	printBtn.Importance = widget.HighImportance
	closeBtn := widget.NewButton("Close", func() { w.Close() })
	c.cmpStatus = widget.NewLabel("")
	c.cmpStatus.Truncation = fyne.TextTruncateEllipsis
	bottom := container.NewBorder(nil, nil, nil, container.NewHBox(printBtn, closeBtn), c.cmpStatus)
	w.SetContent(container.NewBorder(top, bottom, nil, nil, split))
	c.cmpShown = r
	w.Show()
}

// ComparisonWindow returns the comparison window, nil when none is open.
func (c *Controller) ComparisonWindow() fyne.Window { return c.cmpWin }

// detailWords is a change's uncertainty and threshold with its source.
func detailWords(l model.ChangeLine) string {
	var parts []string
	if l.Uncertainty != "" {
		parts = append(parts, "Uncertainty "+l.Uncertainty)
	}
	if l.Threshold != "" {
		t := "threshold: " + l.Threshold
		if l.Source != "" {
			t += " (source: " + l.Source + ")"
		}
		parts = append(parts, t)
	}
	return strings.Join(parts, "; ") + "."
}

// detail is a change's small print: its uncertainty, threshold, source.
func detail(s string) *widget.Label {
	l := widget.NewLabel(s)
	l.Wrapping = fyne.TextWrapWord
	l.TextStyle = fyne.TextStyle{Italic: true}
	l.SizeName = theme.SizeNameCaptionText
	return l
}

func upperFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

func wrapped(s string, imp widget.Importance, bold bool) *widget.Label {
	l := widget.NewLabel(s)
	l.Wrapping = fyne.TextWrapWord
	l.Importance = imp
	l.TextStyle = fyne.TextStyle{Bold: bold}
	return l
}

// printComparisonDialog asks for the folder and paper, then writes the
// comparison page there under the command line's name (a new name when
// a file is there already) and hands it to the system's viewer.
func (c *Controller) printComparisonDialog(r *model.Comparison, earlierPath string) {
	w := c.cmpWin
	if w == nil {
		return
	}
	dir := filepath.Dir(earlierPath)
	if p := c.m.Source().Path; p != "" {
		dir = filepath.Dir(p)
	}
	dirLabel := widget.NewLabel(dir)
	dirLabel.Wrapping = fyne.TextWrapBreak
	paper := widget.NewSelect([]string{"a4", "letter"}, nil)
	paper.SetSelected("a4")
	pick := widget.NewButton("Choose folder…", func() {
		d := dialog.NewFolderOpen(func(u fyne.ListableURI, err error) {
			if err == nil && u != nil {
				dir = u.Path()
				dirLabel.SetText(dir)
			}
		}, w)
		d.SetConfirmText("Use this folder")
		if u, err := storage.ListerForURI(storage.NewFileURI(dir)); err == nil {
			d.SetLocation(u)
		}
		d.Resize(fyne.NewSize(700, 460))
		d.Show()
	})
	name := widget.NewLabel(r.FileStem + ".pdf (a new name if one is there already)")
	name.Wrapping = fyne.TextWrapWord
	d := dialog.NewForm("Print the comparison", "Write", "Cancel", []*widget.FormItem{
		widget.NewFormItem("File", name),
		widget.NewFormItem("Folder", dirLabel),
		widget.NewFormItem("", pick),
		widget.NewFormItem("Paper", paper),
	}, func(ok bool) {
		if ok {
			c.PrintComparison(filepath.Join(dir, r.FileStem+".pdf"), paper.Selected, true)
		}
	}, w)
	d.Resize(fyne.NewSize(620, 300))
	d.Show()
}

// PrintComparison writes the comparison shown to path (or beside it under
// a new name) on the paper given and, when open is set, hands it to the
// system's viewer.
func (c *Controller) PrintComparison(path, paper string, open bool) {
	cmp, ok := c.b.(model.Comparer)
	r := c.cmpShown
	if !ok || r == nil {
		return
	}
	say := func(s string) {
		if c.cmpStatus != nil {
			c.cmpStatus.SetText(s)
		}
		c.setStatus(s)
	}
	say("Writing the comparison page…")
	c.jobs.Add(1)
	go func() {
		defer c.jobs.Done()
		got, err := cmp.PrintComparison(r, path, paper)
		fyne.Do(func() {
			if err != nil {
				say("The comparison page was not written.")
				if c.cmpWin != nil {
					dialog.ShowError(errors.New(engine.Explain(err).String()), c.cmpWin)
				}
				if c.OnPrinted != nil {
					c.OnPrinted("", err)
				}
				return
			}
			msg := "Wrote " + filepath.Base(got) + " in " + filepath.Dir(got) + "."
			if filepath.Clean(got) != filepath.Clean(path) {
				msg += " (" + filepath.Base(path) + " was there already and is left as it was.)"
			}
			say(msg)
			if open && os.Getenv("TRACELIFT_NO_VIEWER") == "" {
				_ = exec.Command("xdg-open", got).Start() // no viewer: the status names the file
			}
			if c.OnPrinted != nil {
				c.OnPrinted(got, nil)
			}
		})
	}()
}

// The two tracings' line styles: the earlier one dark and dashed, the
// current one blue and solid (as on the printed page: earlier dark,
// current blue).
var (
	colEarlier = color.NRGBA{0x22, 0x2a, 0x38, 0xff}
	colCurrent = color.NRGBA{0x00, 0x78, 0xd7, 0xff}
	colMinor   = color.NRGBA{0xf6, 0xd8, 0xd8, 0xff}
	colMajor   = color.NRGBA{0xe4, 0xa4, 0xa4, 0xff}
	colOnset   = color.NRGBA{0x70, 0x70, 0x70, 0xff}
	colMuted   = color.NRGBA{0x50, 0x50, 0x58, 0xff}
)

// lineSwatch is a short sample of a line style for a legend.
func lineSwatch(c color.NRGBA, dashedLine bool) fyne.CanvasObject {
	r := canvas.NewRaster(func(w, h int) image.Image {
		img := image.NewNRGBA(image.Rect(0, 0, w, h))
		draw.Draw(img, img.Rect, image.NewUniform(color.NRGBA{0xff, 0xff, 0xff, 0xff}), image.Point{}, draw.Src)
		k := float64(w) / 40
		if dashedLine {
			dashedPolyline(img, [][2]float64{{2 * k, float64(h) / 2}, {float64(w) - 2*k, float64(h) / 2}}, 2*k, 6*k, 4*k, c)
		} else {
			line(img, 2*k, float64(h)/2, float64(w)-2*k, float64(h)/2, 2.5*k, c)
		}
		return img
	})
	r.SetMinSize(fyne.NewSize(40, 14))
	return container.NewCenter(r)
}

// dashedPolyline draws pts as dashes of on px with off px gaps, the dash
// pattern running on across the vertices.
func dashedPolyline(dst *image.NRGBA, pts [][2]float64, wd, on, off float64, c color.NRGBA) {
	phase := 0.0 // distance into the current on+off period
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		L := math.Hypot(b[0]-a[0], b[1]-a[1])
		if L == 0 || L > 1e5 {
			continue
		}
		s := 0.0
		for s < L {
			if phase < on {
				e := math.Min(L, s+on-phase)
				line(dst, a[0]+(b[0]-a[0])*s/L, a[1]+(b[1]-a[1])*s/L, a[0]+(b[0]-a[0])*e/L, a[1]+(b[1]-a[1])*e/L, wd, c)
				phase += e - s
				s = e
			} else {
				e := math.Min(L, s+on+off-phase)
				phase += e - s
				s = e
			}
			if phase >= on+off {
				phase = 0
			}
		}
	}
}

// beatsView draws each lead's two beats on a millimetre grid at true
// scale (25 mm/s, 10 mm/mV), both QRS onsets at one time, with the lead's
// name and its shift, gain and correlation.
type beatsView struct {
	widget.BaseWidget
	beats  []model.BeatOverlay
	lo, hi float64 // mV window of every box
}

func newBeatsView(b []model.BeatOverlay) *beatsView {
	v := &beatsView{beats: b}
	v.lo, v.hi = model.BeatSpan(b)
	v.ExtendBaseWidget(v)
	return v
}

const (
	beatSpeed = 25.0 // mm/s
	beatGain  = 10.0 // mm/mV
	beatGapMM = 2.0
)

// boxMM is one lead box's size in mm.
func (v *beatsView) boxMM() (w, h float64) {
	span := 900.0
	if len(v.beats) > 0 {
		span = float64(len(v.beats[0].Earlier)-1) * v.beats[0].StepMS
	}
	return span / 1000 * beatSpeed, (v.hi - v.lo) * beatGain
}

// geometry gives the columns, units per mm and the origin that centres
// the grid in a widget of size sz.
func (v *beatsView) geometry(sz fyne.Size) (cols int, k, x0, y0 float64) {
	bw, bh := v.boxMM()
	cols, k = model.BeatGrid(len(v.beats), float64(sz.Width), float64(sz.Height), bw, bh, beatGapMM)
	rows := (len(v.beats) + cols - 1) / max(cols, 1)
	x0 = (float64(sz.Width) - float64(cols)*(bw+beatGapMM)*k) / 2
	y0 = (float64(sz.Height) - float64(rows)*(bh+beatGapMM)*k) / 2
	return cols, k, math.Max(0, x0), math.Max(0, y0)
}

func (v *beatsView) CreateRenderer() fyne.WidgetRenderer {
	r := &beatsRenderer{v: v}
	r.raster = canvas.NewRaster(r.draw)
	for _, b := range v.beats {
		n := canvas.NewText(b.Lead, colEarlier)
		n.TextStyle = fyne.TextStyle{Bold: true}
		n.TextSize = theme.CaptionTextSize() + 1
		note := "not aligned"
		if b.Aligned() {
			note = fmt.Sprintf("%+.0f ms  ×%.2f  r %.2f", b.ShiftMS, b.Gain, b.Corr)
		}
		t := canvas.NewText(note, colMuted)
		t.TextSize = theme.CaptionTextSize() - 1
		r.names = append(r.names, n)
		r.notes = append(r.notes, t)
	}
	return r
}

type beatsRenderer struct {
	v      *beatsView
	raster *canvas.Raster
	names  []*canvas.Text
	notes  []*canvas.Text
	plates [][4]float64 // white plates behind the notes, in units
}

func (r *beatsRenderer) Destroy()           {}
func (r *beatsRenderer) MinSize() fyne.Size { return fyne.NewSize(320, 240) }
func (r *beatsRenderer) Refresh()           { r.raster.Refresh(); r.Layout(r.v.Size()) }

func (r *beatsRenderer) Objects() []fyne.CanvasObject {
	o := []fyne.CanvasObject{r.raster}
	for i := range r.names {
		o = append(o, r.names[i], r.notes[i])
	}
	return o
}

func (r *beatsRenderer) Layout(sz fyne.Size) {
	r.raster.Resize(sz)
	r.raster.Move(fyne.NewPos(0, 0))
	cols, k, x0, y0 := r.v.geometry(sz)
	if k <= 0 {
		return
	}
	bw, bh := r.v.boxMM()
	r.plates = r.plates[:0]
	for i := range r.names {
		bx := x0 + float64(i%cols)*(bw+beatGapMM)*k
		by := y0 + float64(i/cols)*(bh+beatGapMM)*k
		r.names[i].Move(fyne.NewPos(float32(bx+3), float32(by+1)))
		ns := r.notes[i].MinSize()
		r.notes[i].Move(fyne.NewPos(float32(bx+bw*k)-ns.Width-2, float32(by+bh*k)-ns.Height-1))
		if float64(ns.Width) > bw*k-4 {
			r.notes[i].Hide()
		} else {
			r.notes[i].Show()
			p := r.notes[i].Position()
			r.plates = append(r.plates, [4]float64{float64(p.X) - 2, float64(p.Y), float64(p.X+ns.Width) + 1, float64(p.Y + ns.Height)})
		}
	}
}

func (r *beatsRenderer) draw(w, h int) image.Image {
	v := r.v
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	bg := theme.Color(theme.ColorNameBackground)
	draw.Draw(img, img.Rect, image.NewUniform(bg), image.Point{}, draw.Src)
	sz := v.Size()
	if sz.Width <= 0 || w == 0 || len(v.beats) == 0 {
		return img
	}
	dev := float64(w) / float64(sz.Width) // device px per unit
	cols, k, x0, y0 := v.geometry(sz)
	if k <= 0 {
		return img
	}
	k *= dev // device px per mm
	x0, y0 = x0*dev, y0*dev
	bw, bh := v.boxMM()
	white := color.NRGBA{0xff, 0xff, 0xff, 0xff}
	for i, b := range v.beats {
		bx := x0 + float64(i%cols)*(bw+beatGapMM)*k
		by := y0 + float64(i/cols)*(bh+beatGapMM)*k
		fill(img, bx, by, bx+bw*k, by+bh*k, white)
		for _, major := range []bool{false, true} {
			col, lw := colMinor, math.Max(1, 0.6*dev)
			if major {
				col, lw = colMajor, math.Max(1, dev)
			}
			for mm := 0; float64(mm) <= bw+1e-9; mm++ {
				if (mm%5 == 0) == major {
					line(img, bx+float64(mm)*k, by, bx+float64(mm)*k, by+bh*k, lw, col)
				}
			}
			for mm := 0; float64(mm) <= bh+1e-9; mm++ {
				if (mm%5 == 0) == major {
					line(img, bx, by+float64(mm)*k, bx+bw*k, by+float64(mm)*k, lw, col)
				}
			}
		}
		// The QRS onset, time 0 of both beats.
		ox := bx + (-b.T0MS/1000)*beatSpeed*k
		dashed(img, ox, by, ox, by+bh*k, math.Max(1, dev), colOnset)
		toPx := func(kk int, mv float64) [2]float64 {
			t := (float64(kk) * b.StepMS) / 1000 // s from the box's left edge
			return [2]float64{bx + t*beatSpeed*k, by + (v.hi-mv)*beatGain*k}
		}
		for _, tr := range []struct {
			mv     []float64
			col    color.NRGBA
			dashed bool
		}{{b.Current, colCurrent, false}, {b.Earlier, colEarlier, true}} {
			// The current beat first, the earlier one dashed over it:
			// where they agree both stay visible.
			var run [][2]float64
			flush := func() {
				if len(run) > 1 {
					if tr.dashed {
						dashedPolyline(img, run, 1.6*dev, 5*dev, 3*dev, tr.col)
					} else {
						for j := 1; j < len(run); j++ {
							line(img, run[j-1][0], run[j-1][1], run[j][0], run[j][1], 2*dev, tr.col)
						}
					}
				}
				run = run[:0]
			}
			for kk, mv := range tr.mv {
				if math.IsNaN(mv) || mv < v.lo || mv > v.hi {
					flush()
					continue
				}
				run = append(run, toPx(kk, mv))
			}
			flush()
		}
		rect(img, bx, by, bx+bw*k, by+bh*k, math.Max(1, dev), colMajor)
	}
	for _, p := range r.plates {
		fill(img, p[0]*dev, p[1]*dev, p[2]*dev, p[3]*dev, color.NRGBA{0xff, 0xff, 0xff, 0xe0})
	}
	return img
}
