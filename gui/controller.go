package gui

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"

	"tracelift/gui/engine"
	"tracelift/gui/model"
	"tracelift/record"
)

// Controller ties the window to the model: it starts the slow work in
// goroutines, hands results back on the UI goroutine with fyne.Do, and
// refreshes the screens after each edit.
type Controller struct {
	app  fyne.App
	win  fyne.Window
	b    model.Backend
	m    *model.Model
	demo model.Source

	view     *printView
	side     *sidePanel
	findings *findingsView
	status   *widget.Label
	progress *widget.ProgressBar
	toolBar  *widget.RadioGroup
	tabs     *container.AppTabs
	overlays *widget.Check

	// the source last asked for, with where its project goes: a reading
	// that failed can be tried again with settings given by hand
	lastSrc     model.Source
	lastProject string
	lastCorrs   []record.Correction

	// the comparison window with an earlier tracing, when open
	cmpWin    fyne.Window
	cmpShown  *model.Comparison
	cmpStatus *widget.Label
	cmpCancel context.CancelFunc

	mu     sync.Mutex
	cancel context.CancelFunc
	gen    int // which load is current
	jobs   sync.WaitGroup
	busy   atomic.Bool

	// OnLoaded is called (on the UI goroutine) after each printout is
	// shown; the app's --screenshot flag hooks in here.
	OnLoaded func(err error)
	// OnCompared is called (on the UI goroutine) after a comparison with
	// an earlier tracing is shown or has failed; OnPrinted after its page
	// is written (file) or not (err).
	OnCompared func(err error)
	OnPrinted  func(file string, err error)
	// Ask replaces the yes/no dialog (tests answer without a window).
	Ask func(title, msg string, answer func(bool))
	// AskScale replaces the Scale tool's dialog (tests).
	AskScale func(a, b [2]float64)
	// AskLead replaces the dialog that names a panel drawn with the New
	// panel tool (tests); answer with "" to cancel.
	AskLead func(box [4]float64, missing []string, answer func(lead string))
	// Failure replaces the dialog of a reading that failed (tests); retry
	// reads the file again with the settings given.
	Failure func(name string, ex engine.Explanation, retry func(model.Settings))
}

// NewController builds the window over a backend; demo is what opens
// first.
func NewController(a fyne.App, b model.Backend, demo model.Source) *Controller {
	c := &Controller{app: a, b: b, m: model.New(b), demo: demo}
	c.win = a.NewWindow("tracelift")
	c.build()
	return c
}

// Window returns the main window.
func (c *Controller) Window() fyne.Window { return c.win }

// Model returns the model (tests read it).
func (c *Controller) Model() *model.Model { return c.m }

// Wait blocks until the background work started so far has ended.
func (c *Controller) Wait() { c.jobs.Wait() }

// Busy reports whether a reading is under way.
func (c *Controller) Busy() bool { return c.busy.Load() }

func (c *Controller) build() {
	c.view = newPrintView(c)
	c.side = newSidePanel(c)
	c.findings = newFindingsView(c)
	c.status = widget.NewLabel("")
	c.status.Truncation = fyne.TextTruncateEllipsis
	c.progress = widget.NewProgressBar()
	c.progress.Hide()
	c.toolBar = widget.NewRadioGroup(toolNames, func(s string) {
		for i, n := range toolNames {
			if n == s {
				c.view.setTool(Tool(i))
				c.setStatus(toolHelp[i])
			}
		}
	})
	c.toolBar.Horizontal = true
	c.toolBar.Required = true
	c.toolBar.SetSelected(toolNames[0])

	c.tabs = container.NewAppTabs(
		container.NewTabItem("Reading", c.side.obj),
		container.NewTabItem("Findings", c.findings.obj),
	)
	split := container.NewHSplit(c.view, c.tabs)
	split.Offset = 0.68
	c.overlays = widget.NewCheck("Overlays", func(on bool) {
		c.view.hideOverlays = !on
		c.view.Refresh()
	})
	c.overlays.SetChecked(true)
	// The tool bar scrolls sideways rather than widen the window beyond a
	// small screen (1366×768 at 1.6× scaling is 854×480 units).
	top := container.NewHScroll(container.NewHBox(widget.NewLabel("Tool:"), c.toolBar, widget.NewSeparator(),
		widget.NewButton("Undo", c.undo), widget.NewButton("Redo", c.redo), widget.NewSeparator(),
		widget.NewButton("Whole page", func() { c.view.fit = true; c.view.Refresh() }), c.overlays))
	caution := widget.NewLabel(model.Caution)
	caution.Wrapping = fyne.TextWrapWord
	caution.Importance = widget.WarningImportance
	bottom := container.NewVBox(caution, container.NewBorder(nil, nil, nil, container.NewGridWrap(fyne.NewSize(160, 20), c.progress), c.status))
	c.win.SetContent(container.NewBorder(top, bottom, nil, nil, split))
	c.win.SetMainMenu(c.menu())
	c.shortcuts()
	c.win.SetOnDropped(func(_ fyne.Position, uris []fyne.URI) {
		for _, u := range uris {
			if u.Scheme() == "file" {
				c.OpenPath(u.Path())
				return
			}
		}
	})
	// A size that fits a 1366×768 screen with its task bar; the window
	// manager may make it larger, and every part scrolls when smaller.
	c.win.Resize(fyne.NewSize(1280, 680))
}

var toolHelp = []string{
	"Look: drag to pan, wheel to zoom, click a panel to choose it.",
	"Shift: drag across a stretch to choose it, then drag inside it up or down.",
	"Redraw: draw the trace freehand along the panel; it replaces what is under the stroke.",
	"Erase: drag across a stretch; it becomes a gap.",
	"Baseline: drag in a panel up or down to move its zero line.",
	"Box: drag a panel to move its box, or a handle on its edge or corner to resize it; its signal is read again.",
	"Scale: click two grid lines a known distance apart.",
	"New panel: drag a box around a lead's trace that has no box, then name the lead; it is traced and measured.",
}

func (c *Controller) setStatus(s string) { c.status.SetText(s) }

func nowMillis() int64 { return time.Now().UnixMilli() }

// ShowDemo opens the embedded demo printout.
func (c *Controller) ShowDemo() { c.Open(c.demo, model.Found{}) }

// OpenPath opens an image file: it looks for the project file beside it
// first and asks before using one made for another image.
func (c *Controller) OpenPath(path string) {
	src := model.Source{Path: path, Name: filepath.Base(path)}
	c.setStatus("Opening " + src.Name + "…")
	c.jobs.Add(1)
	go func() {
		defer c.jobs.Done()
		found := model.FindProject(path)
		fyne.Do(func() { c.openFound(src, found) })
	}()
}

func (c *Controller) openFound(src model.Source, found model.Found) {
	if found.Err != nil && found.SHA256 == "" {
		c.failed(src, found.Err)
		return
	}
	if found.Err != nil { // a project file we cannot read: keep it, start afresh
		kept, err := model.SetAside(found.Path, time.Now())
		msg := fmt.Sprintf("The project file beside this image could not be read (%v).", found.Err)
		if err == nil {
			msg += "\nIt was kept as " + filepath.Base(kept) + "; a new one is started."
		} else {
			msg += "\nIt is left untouched and this session's edits will not be saved."
			found.Path = ""
		}
		dialog.ShowInformation("Project file", msg, c.win)
		found.Project, found.Err = nil, nil
	}
	if found.Mismatch {
		c.ask("Project for another image",
			"The corrections saved beside "+src.Name+" were made on a different image (its contents changed).\n"+
				"Use them anyway? (No keeps the old file under another name and starts afresh.)",
			func(yes bool) {
				if !yes {
					if _, err := model.SetAside(found.Path, time.Now()); err != nil {
						dialog.ShowError(err, c.win)
						found.Path = ""
					}
					found.Project = nil
				}
				found.Mismatch = false
				c.Open(src, found)
			})
		return
	}
	c.Open(src, found)
}

func (c *Controller) ask(title, msg string, answer func(bool)) {
	if c.Ask != nil {
		c.Ask(title, msg, answer)
		return
	}
	dialog.ShowConfirm(title, msg, answer, c.win)
}

// Open reads a source in the background (cancelling any reading under
// way) and shows it when done. found carries its project, if any.
func (c *Controller) Open(src model.Source, found model.Found) {
	var s model.Settings
	var corrs []record.Correction
	if found.Project != nil {
		s, corrs = found.Project.Settings, found.Project.Corrections
	}
	projectPath := ""
	if src.IsFile() {
		projectPath = found.Path
		if projectPath == "" && found.SHA256 != "" {
			projectPath = model.ProjectPath(src.Path)
		}
	}
	c.read(src, s, corrs, projectPath)
}

func (c *Controller) read(src model.Source, s model.Settings, corrs []record.Correction, projectPath string) {
	c.lastSrc, c.lastProject, c.lastCorrs = src, projectPath, corrs
	c.mu.Lock()
	if c.cancel != nil {
		c.cancel()
	}
	ctx, cancel := context.WithCancel(context.Background())
	c.cancel = cancel
	c.gen++
	gen := c.gen
	c.mu.Unlock()

	c.busy.Store(true)
	c.progress.SetValue(0)
	c.progress.Show()
	name := src.Name
	if name == "" {
		name = filepath.Base(src.Path)
	}
	c.setStatus("Reading " + name + "…")

	var last atomic.Int64
	progress := func(stage string, frac float64) {
		now := time.Now().UnixMilli()
		if now-last.Load() < 50 { // at most 20 updates a second
			return
		}
		last.Store(now)
		fyne.Do(func() {
			if c.current(gen) {
				c.progress.SetValue(frac)
				c.setStatus("Reading " + name + ": " + stage + "…")
			}
		})
	}
	c.jobs.Add(1)
	go func() {
		defer c.jobs.Done()
		defer cancel()
		a, err := model.Load(ctx, c.b, src, s, progress)
		fyne.Do(func() {
			if !c.current(gen) {
				return
			}
			c.busy.Store(false)
			c.progress.Hide()
			if err != nil {
				if errors.Is(err, context.Canceled) {
					return
				}
				c.failed(src, err)
				return
			}
			newFile := c.m.Source().Path != src.Path || c.m.Source().Name != src.Name || !c.m.Loaded()
			ierr := c.m.Install(src, a, s, corrs, projectPath)
			if s != (model.Settings{}) {
				c.m.Save() // the settings are part of the project too; an error shows on the Reading tab
			}
			c.view.selected = -1
			c.view.setImage(a.Image)
			c.refresh()
			if newFile {
				c.newFileShown()
				if c.cmpWin != nil { // it compared the tracing that was on screen
					c.cmpWin.Close()
				}
			}
			msg := fmt.Sprintf("%s: %d panels, layout %s, scale from %s.", name, len(a.Panels), a.Layout, a.ScaleSource)
			if a.LayoutNote != "" {
				msg = fmt.Sprintf("%s: %d panels read as %s, but %s.", name, len(a.Panels), a.Layout, a.LayoutNote)
			}
			if n := len(corrs); n > 0 {
				msg += fmt.Sprintf(" %d corrections restored.", n)
			}
			if ierr != nil {
				msg += " Some corrections no longer fit: " + ierr.Error()
			}
			if src.IsFile() {
				c.addRecent(src.Path)
				c.win.SetTitle("tracelift — " + name)
			} else {
				c.win.SetTitle("tracelift — " + name + " (demo; edits are not saved)")
			}
			c.setStatus(msg)
			if c.OnLoaded != nil {
				c.OnLoaded(nil)
			}
		})
	}()
}

func (c *Controller) current(gen int) bool {
	c.mu.Lock()
	defer c.mu.Unlock()
	return gen == c.gen
}

// newFileShown puts the window in its starting state for another file:
// the keyboard on the printout (not in a settings field, where + would be
// typed instead of zooming), the side tabs scrolled to the top.
func (c *Controller) newFileShown() {
	c.win.Canvas().Focus(c.view)
	c.side.obj.ScrollToTop()
	c.findings.obj.ScrollToTop()
}

func (c *Controller) failed(src model.Source, err error) {
	c.busy.Store(false)
	c.progress.Hide()
	name := src.Name
	if name == "" {
		name = filepath.Base(src.Path)
	}
	c.setStatus("Could not read " + name + ".")
	if c.OnLoaded != nil {
		c.OnLoaded(err)
	}
	ex := engine.Explain(err)
	if errors.Is(err, context.Canceled) {
		return
	}
	c.showFailure(name, ex, func(s model.Settings) { c.read(src, s, c.lastCorrs, c.lastProject) })
}

// Reread reads the printout on screen again with new settings, keeping the
// corrections. With nothing on screen (the first file failed) it tries the
// file asked for last.
func (c *Controller) Reread(s model.Settings) {
	if !c.m.Loaded() {
		if c.lastSrc.Path == "" && c.lastSrc.Data == nil {
			return
		}
		c.read(c.lastSrc, s, c.lastCorrs, c.lastProject)
		return
	}
	corrs := c.m.Corrections()
	if s.Page != c.m.Settings().Page && len(corrs) > 0 {
		// The corrections belong to the other page: keep them aside.
		if pp := c.m.ProjectPath(); pp != "" {
			if kept, err := model.SetAside(pp, time.Now()); err == nil {
				dialog.ShowInformation("Another page", "The corrections of the page you leave are kept in "+filepath.Base(kept)+".", c.win)
			}
		}
		corrs = nil
	}
	c.read(c.m.Source(), s, corrs, c.m.ProjectPath())
}

// edited is called after each edit attempt from the view.
func (c *Controller) edited(err error) {
	if err != nil {
		c.setStatus(err.Error())
		c.view.Refresh()
		return
	}
	c.refresh()
	ch := c.m.Changes()
	msg := "Edit applied; measurements unchanged."
	if c.m.Summary() == nil {
		msg = "Edit applied; not measured"
		if e := c.m.MeasureErr(); e != nil {
			msg += ": " + e.Error()
		}
		msg += "."
	} else if len(ch) > 0 {
		msg = fmt.Sprintf("Edit applied; %d measurements changed (listed on the Findings tab).", len(ch))
	}
	if e := c.m.SaveErr(); e != nil {
		msg += " NOT SAVED: " + e.Error()
	}
	c.setStatus(msg)
}

func (c *Controller) undo() {
	if c.m.Undo() {
		c.refresh()
		c.setStatus("Undone.")
	}
}

func (c *Controller) redo() {
	if c.m.Redo() {
		c.refresh()
		c.setStatus("Redone.")
	}
}

// refresh redraws everything from the model.
func (c *Controller) refresh() {
	c.view.Refresh()
	c.side.refresh()
	c.findings.refresh()
}

// boxDragged moves or resizes panel i's box; when the new box would cover
// a neighbour, it asks first (the trace there would be read twice).
func (c *Controller) boxDragged(i int, box [4]float64) {
	over := c.m.Overlaps(i, box)
	if len(over) == 0 {
		c.edited(c.m.MoveBox(i, box))
		return
	}
	var names []string
	for _, o := range over {
		names = append(names, fmt.Sprintf("%s (%.0f%% of its box)", o.Lead, 100*o.Share))
	}
	lead := c.m.Panels()[i].Lead
	c.ask("Box over a neighbour",
		fmt.Sprintf("The box of %s would now cover %s.\nThe trace there would be read into both leads and the measurements would change.\nMove it anyway?",
			lead, strings.Join(names, ", ")),
		func(yes bool) {
			if !yes {
				c.setStatus("The box of " + lead + " is left where it was.")
				c.view.Refresh()
				return
			}
			c.edited(c.m.MoveBox(i, box))
		})
}

// panelDrawn asks which lead the box drawn with the New panel tool holds
// (the leads not on the page are offered), warns when it covers a panel,
// and adds it.
func (c *Controller) panelDrawn(box [4]float64) {
	if !c.m.Loaded() {
		return
	}
	if a := c.m.Analysis(); box[2]-box[0] < 2*a.PxPerMM || box[3]-box[1] < 2*a.PxPerMM {
		c.setStatus("New panel: drag a box around the lead's trace, from its first column to its last.")
		c.view.Refresh()
		return
	}
	missing := c.m.MissingLeads()
	if len(missing) == 0 {
		c.setStatus("Every standard lead has its panel already; to name a panel again, use the Reading tab.")
		c.view.Refresh()
		return
	}
	answer := func(lead string) {
		if strings.TrimSpace(lead) == "" {
			c.setStatus("No panel added.")
			c.view.Refresh()
			return
		}
		c.addPanel(box, lead)
	}
	if c.AskLead != nil {
		c.AskLead(box, missing, answer)
		return
	}
	choice := widget.NewSelectEntry(missing)
	choice.SetText(missing[0])
	dialog.ShowForm("New panel", "Add", "Cancel",
		[]*widget.FormItem{widget.NewFormItem("Lead in the box", choice)},
		func(ok bool) {
			if !ok {
				answer("")
				return
			}
			answer(choice.Text)
		}, c.win)
}

// addPanel adds the drawn panel, asking first when it covers a neighbour.
func (c *Controller) addPanel(box [4]float64, lead string) {
	add := func() {
		if err := c.m.AddPanel(box, lead); err != nil {
			c.setStatus("New panel: " + engine.Plain(err))
			c.view.Refresh()
			return
		}
		c.edited(nil)
	}
	over := c.m.Overlaps(-1, box)
	if len(over) == 0 {
		add()
		return
	}
	var names []string
	for _, o := range over {
		names = append(names, fmt.Sprintf("%s (%.0f%% of its box)", o.Lead, 100*o.Share))
	}
	c.ask("Box over a neighbour",
		fmt.Sprintf("The box drawn for %s covers %s.\nThe trace there would be read into both leads.\nAdd it anyway?", strings.TrimSpace(lead), strings.Join(names, ", ")),
		func(yes bool) {
			if !yes {
				c.setStatus("No panel added.")
				c.view.Refresh()
				return
			}
			add()
		})
}

func (c *Controller) panelChosen(i int) {
	c.side.refresh()
	if i >= 0 {
		p := c.m.Panels()[i]
		c.setStatus(fmt.Sprintf("Panel %s, %.1f–%.1f s.", p.Lead, p.T0S, p.T1S))
	}
}

// askScale asks how far apart the two clicked lines are; AskScale
// replaces the dialog in tests.
func (c *Controller) askScale(a, b [2]float64) {
	if c.AskScale != nil {
		c.AskScale(a, b)
		return
	}
	mm := widget.NewEntry()
	mm.SetText("10")
	dialog.ShowForm("Set the scale", "Apply", "Cancel",
		[]*widget.FormItem{widget.NewFormItem("Distance between the two lines (mm)", mm)},
		func(ok bool) {
			if ok {
				c.applyScale(a, b, mm.Text)
			}
		}, c.win)
}

// applyScale reads the page again at the scale two clicked points mm apart
// give.
func (c *Controller) applyScale(a, b [2]float64, mmText string) {
	d, err := strconv.ParseFloat(strings.TrimSpace(strings.ReplaceAll(mmText, ",", ".")), 64)
	if err != nil {
		c.setStatus(fmt.Sprintf("Scale: %q is not a number of mm.", mmText))
		return
	}
	px, err := c.m.ScaleFromClicks(a[0], a[1], b[0], b[1], d)
	if err != nil {
		c.setStatus(engine.Plain(err))
		return
	}
	s := c.m.Settings()
	s.PxPerMM = px
	c.Reread(s)
}
