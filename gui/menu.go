package gui

import (
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/storage"
	"fyne.io/fyne/v2/widget"

	"tracelift/gui/engine"
	"tracelift/gui/model"
)

const recentKey = "recent_files"

var exportFormats = []string{"csv", "wfdb", "edf", "json", "pdf"}

func (c *Controller) menu() *fyne.MainMenu {
	recent := fyne.NewMenuItem("Open recent", nil)
	recent.ChildMenu = fyne.NewMenu("")
	c.fillRecent(recent)
	file := fyne.NewMenu("File",
		fyne.NewMenuItem("Open…", c.openDialog),
		recent,
		fyne.NewMenuItem("Open the demo", c.ShowDemo),
		fyne.NewMenuItemSeparator(),
		fyne.NewMenuItem("Export…", c.exportDialog),
		fyne.NewMenuItem("Print summary…", c.print),
		fyne.NewMenuItemSeparator(),
		fyne.NewMenuItem("Compare with earlier tracing…", c.compareDialog),
	)
	// The keys are named in the labels, not set as the items' shortcuts:
	// a menu's shortcut would take Ctrl+Z from a settings field's own text.
	edit := fyne.NewMenu("Edit",
		fyne.NewMenuItem("Undo (Ctrl+Z)", c.undo),
		fyne.NewMenuItem("Redo (Ctrl+Shift+Z, Ctrl+Y)", c.redo),
	)
	view := fyne.NewMenu("View",
		fyne.NewMenuItem("Zoom in", func() { c.view.zoomCentre(1.25) }),
		fyne.NewMenuItem("Zoom out", func() { c.view.zoomCentre(0.8) }),
		fyne.NewMenuItem("Whole page", func() { c.view.fit = true; c.view.Refresh() }),
	)
	help := fyne.NewMenu("Help",
		fyne.NewMenuItem("Keys", func() { dialog.ShowInformation("Keys", keysHelp, c.win) }),
		fyne.NewMenuItem("About", func() {
			dialog.ShowInformation("About tracelift", "tracelift turns a picture of a paper ECG into signals in mV and measures them.\n\n"+model.Caution, c.win)
		}),
	)
	return fyne.NewMainMenu(file, edit, view, help)
}

const keysHelp = `Ctrl+O open   Ctrl+E export   Ctrl+P print summary
Ctrl+Z undo   Ctrl+Shift+Z (or Ctrl+Y) redo
+ / − zoom   0 whole page   arrow keys pan
1 Look  2 Shift  3 Redraw  4 Erase  5 Baseline  6 Box  7 Scale  8 New panel
Esc cancels the gesture under way`

func (c *Controller) shortcuts() {
	cv := c.win.Canvas()
	add := func(k fyne.KeyName, mod fyne.KeyModifier, f func()) {
		cv.AddShortcut(&desktop.CustomShortcut{KeyName: k, Modifier: mod}, func(fyne.Shortcut) { f() })
	}
	// The desktop driver turns Ctrl+Z and Ctrl+Y into fyne's own undo and
	// redo shortcuts (not custom ones); Ctrl+Shift+Z stays a custom one. A
	// settings field that holds the focus keeps them for its own text.
	cv.AddShortcut(&fyne.ShortcutUndo{}, func(fyne.Shortcut) { c.undo() })
	cv.AddShortcut(&fyne.ShortcutRedo{}, func(fyne.Shortcut) { c.redo() })
	add(fyne.KeyZ, fyne.KeyModifierShortcutDefault|fyne.KeyModifierShift, c.redo)
	add(fyne.KeyO, fyne.KeyModifierShortcutDefault, c.openDialog)
	add(fyne.KeyE, fyne.KeyModifierShortcutDefault, c.exportDialog)
	add(fyne.KeyP, fyne.KeyModifierShortcutDefault, c.print)
	add(fyne.KeyQ, fyne.KeyModifierShortcutDefault, c.app.Quit)
	cv.SetOnTypedKey(func(e *fyne.KeyEvent) { c.key(e.Name) })
	cv.SetOnTypedRune(c.typedRune)
}

// typedRune handles the one-key commands (zoom, whole page, tools).
func (c *Controller) typedRune(r rune) {
	switch r {
	case '+', '=':
		c.view.zoomCentre(1.25)
	case '-':
		c.view.zoomCentre(0.8)
	case '0':
		c.view.fit = true
		c.view.Refresh()
	}
	if r >= '1' && int(r-'1') < len(toolNames) {
		c.toolBar.SetSelected(toolNames[r-'1'])
	}
}

func (c *Controller) key(k fyne.KeyName) {
	const step = 60
	switch k {
	case fyne.KeyLeft:
		c.view.pan(step, 0)
	case fyne.KeyRight:
		c.view.pan(-step, 0)
	case fyne.KeyUp:
		c.view.pan(0, step)
	case fyne.KeyDown:
		c.view.pan(0, -step)
	case fyne.KeyEscape:
		c.view.cancelGesture()
		c.setStatus("Cancelled; nothing was changed.")
	}
}

func (c *Controller) openDialog() {
	d := c.fileDialog([]string{".png", ".jpg", ".jpeg", ".tif", ".tiff", ".pdf"}, c.OpenPath)
	d.Resize(fyne.NewSize(900, 600))
	d.Show()
}

func (c *Controller) recentList() []string {
	return c.app.Preferences().StringList(recentKey)
}

func (c *Controller) addRecent(path string) {
	list := []string{path}
	for _, p := range c.recentList() {
		if p != path && len(list) < 10 {
			list = append(list, p)
		}
	}
	c.app.Preferences().SetStringList(recentKey, list)
	c.win.SetMainMenu(c.menu())
}

func (c *Controller) fillRecent(item *fyne.MenuItem) {
	list := c.recentList()
	if len(list) == 0 {
		item.ChildMenu.Items = []*fyne.MenuItem{fyne.NewMenuItem("(none yet)", nil)}
		item.ChildMenu.Items[0].Disabled = true
		return
	}
	for _, p := range list {
		p := p
		item.ChildMenu.Items = append(item.ChildMenu.Items, fyne.NewMenuItem(p, func() { c.OpenPath(p) }))
	}
}

// stem names the exported files after the open printout.
func (c *Controller) stem() string {
	src := c.m.Source()
	n := src.Name
	if src.Path != "" {
		n = filepath.Base(src.Path)
	}
	n = strings.TrimSuffix(n, filepath.Ext(n))
	if n == "" {
		n = "tracing"
	}
	return n
}

// Preference keys of the export dialog: the formats and the folder chosen
// last, offered again next time.
const (
	exportFormatsKey = "export_formats"
	exportDirKey     = "export_dir"
)

// exportChoice returns the formats and folder to offer: the last ones
// chosen, else CSV, JSON and PDF into the image's folder (home for the
// demo).
func (c *Controller) exportChoice() ([]string, string) {
	prefs := c.app.Preferences()
	formats := orderFormats(prefs.StringList(exportFormatsKey))
	if len(formats) == 0 {
		formats = []string{"csv", "json", "pdf"}
	}
	dir := prefs.String(exportDirKey)
	if st, err := os.Stat(dir); dir == "" || err != nil || !st.IsDir() {
		dir = ""
		if p := c.m.Source().Path; p != "" {
			dir = filepath.Dir(p)
		} else if h, err := os.UserHomeDir(); err == nil {
			dir = h
		}
	}
	return formats, dir
}

// orderFormats keeps the known formats of list in the dialog's order.
func orderFormats(list []string) []string {
	var out []string
	for _, f := range exportFormats {
		for _, g := range list {
			if f == g {
				out = append(out, f)
				break
			}
		}
	}
	return out
}

func (c *Controller) exportDialog() {
	if !c.m.Loaded() {
		return
	}
	formats, dir := c.exportChoice()
	checks := widget.NewCheckGroup(exportFormats, nil)
	checks.SetSelected(formats)
	dirLabel := widget.NewLabel(dir)
	dirLabel.Wrapping = fyne.TextWrapBreak
	pick := widget.NewButton("Choose folder…", func() {
		d := dialog.NewFolderOpen(func(u fyne.ListableURI, err error) {
			if err == nil && u != nil {
				dir = u.Path()
				dirLabel.SetText(dir)
			}
		}, c.win)
		d.SetTitleText("Choose the folder to write into")
		d.SetConfirmText("Use this folder")
		if u, err := storage.ListerForURI(storage.NewFileURI(dir)); err == nil {
			d.SetLocation(u)
		}
		d.Resize(fyne.NewSize(700, 460))
		d.Show()
	})
	dialog.ShowForm("Export", "Write", "Cancel", []*widget.FormItem{
		widget.NewFormItem("Formats", checks),
		widget.NewFormItem("Folder", dirLabel),
		widget.NewFormItem("", pick),
	}, func(ok bool) {
		if ok {
			c.export(dir, checks.Selected, false)
		}
	}, c.win)
}

// export writes the files in the background and reports them. The formats
// and folder are remembered for the next export (not for printing).
func (c *Controller) export(dir string, formats []string, openAfter bool) {
	formats = orderFormats(formats)
	if len(formats) == 0 {
		c.setStatus("Export: no format chosen.")
		return
	}
	if !openAfter {
		c.app.Preferences().SetStringList(exportFormatsKey, formats)
		c.app.Preferences().SetString(exportDirKey, dir)
	}
	a, job := c.m.Analysis(), c.m.ExportJob(dir, c.stem(), formats)
	c.setStatus("Writing " + strings.Join(formats, ", ") + "…")
	c.jobs.Add(1)
	go func() {
		defer c.jobs.Done()
		files, err := c.b.Export(a, job)
		fyne.Do(func() {
			if err != nil {
				msg := engine.Explain(err).String()
				if len(files) > 0 {
					msg += "\n\nWritten before it stopped: " + baseNames(files) + "."
				}
				dialog.ShowError(errors.New(msg), c.win)
				c.setStatus(fmt.Sprintf("Export stopped: %d of the files written.", len(files)))
				return
			}
			c.setStatus(fmt.Sprintf("Wrote %s in %s.", baseNames(files), dir))
			if openAfter && len(files) > 0 {
				if err := exec.Command("xdg-open", files[len(files)-1]).Start(); err != nil {
					dialog.ShowInformation("Print", "The summary is in "+files[len(files)-1]+"; open it to print.", c.win)
				}
			}
		})
	}()
}

func baseNames(files []string) string {
	names := make([]string, len(files))
	for i, f := range files {
		names[i] = filepath.Base(f)
	}
	return strings.Join(names, ", ")
}

// print writes the PDF summary to a temporary folder and hands it to the
// system's viewer, which prints it.
func (c *Controller) print() {
	if !c.m.Loaded() {
		return
	}
	dir, err := os.MkdirTemp("", "tracelift-print-")
	if err != nil {
		dialog.ShowError(err, c.win)
		return
	}
	c.export(dir, []string{"pdf"}, true)
}

// fileDialog is a file chooser over files of the given extensions (in
// either case) that hands the chosen path to then; cancelling does
// nothing, and a failure to open is shown.
func (c *Controller) fileDialog(exts []string, then func(path string)) *dialog.FileDialog {
	d := dialog.NewFileOpen(func(r fyne.URIReadCloser, err error) {
		if err != nil {
			dialog.ShowError(err, c.win)
			return
		}
		if r == nil {
			return
		}
		path := r.URI().Path()
		r.Close()
		then(path)
	}, c.win)
	var filter []string
	for _, e := range exts {
		filter = append(filter, e, strings.ToUpper(e))
	}
	d.SetFilter(storage.NewExtensionFileFilter(filter))
	return d
}
