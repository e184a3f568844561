package gui

import (
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
	)
	edit := fyne.NewMenu("Edit",
		fyne.NewMenuItem("Undo", c.undo),
		fyne.NewMenuItem("Redo", c.redo),
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
1 Look  2 Shift  3 Redraw  4 Erase  5 Baseline  6 Box  7 Scale
Esc cancels the gesture under way`

func (c *Controller) shortcuts() {
	cv := c.win.Canvas()
	add := func(k fyne.KeyName, mod fyne.KeyModifier, f func()) {
		cv.AddShortcut(&desktop.CustomShortcut{KeyName: k, Modifier: mod}, func(fyne.Shortcut) { f() })
	}
	add(fyne.KeyZ, fyne.KeyModifierShortcutDefault, c.undo)
	add(fyne.KeyZ, fyne.KeyModifierShortcutDefault|fyne.KeyModifierShift, c.redo)
	add(fyne.KeyY, fyne.KeyModifierShortcutDefault, c.redo)
	add(fyne.KeyO, fyne.KeyModifierShortcutDefault, c.openDialog)
	add(fyne.KeyE, fyne.KeyModifierShortcutDefault, c.exportDialog)
	add(fyne.KeyP, fyne.KeyModifierShortcutDefault, c.print)
	add(fyne.KeyQ, fyne.KeyModifierShortcutDefault, c.app.Quit)
	cv.SetOnTypedKey(func(e *fyne.KeyEvent) { c.key(e.Name) })
	cv.SetOnTypedRune(func(r rune) {
		switch r {
		case '+', '=':
			c.view.zoomCentre(1.25)
		case '-':
			c.view.zoomCentre(0.8)
		case '0':
			c.view.fit = true
			c.view.Refresh()
		}
		if r >= '1' && r <= '7' {
			c.toolBar.SetSelected(toolNames[r-'1'])
		}
	})
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
		c.view.clearGesture()
		c.view.selX0, c.view.selX1 = 0, 0
		c.view.Refresh()
	}
}

func (c *Controller) openDialog() {
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
		c.OpenPath(path)
	}, c.win)
	d.SetFilter(storage.NewExtensionFileFilter([]string{".png", ".jpg", ".jpeg", ".tif", ".tiff", ".pdf", ".PNG", ".JPG", ".JPEG", ".TIF", ".TIFF", ".PDF"}))
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

func (c *Controller) exportDialog() {
	if !c.m.Loaded() {
		return
	}
	checks := widget.NewCheckGroup(exportFormats, nil)
	checks.SetSelected([]string{"csv", "json", "pdf"})
	dir := ""
	if p := c.m.Source().Path; p != "" {
		dir = filepath.Dir(p)
	} else if h, err := os.UserHomeDir(); err == nil {
		dir = h
	}
	dirLabel := widget.NewLabel(dir)
	pick := widget.NewButton("Choose folder…", func() {
		dialog.ShowFolderOpen(func(u fyne.ListableURI, err error) {
			if err == nil && u != nil {
				dir = u.Path()
				dirLabel.SetText(dir)
			}
		}, c.win)
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

// export writes the files in the background and reports them.
func (c *Controller) export(dir string, formats []string, openAfter bool) {
	if len(formats) == 0 {
		c.setStatus("Export: no format chosen.")
		return
	}
	a, rec, stem := c.m.Analysis(), c.m.Record(), c.stem()
	c.setStatus("Writing " + strings.Join(formats, ", ") + "…")
	c.jobs.Add(1)
	go func() {
		defer c.jobs.Done()
		files, err := c.b.Export(a, rec, dir, stem, formats)
		fyne.Do(func() {
			if err != nil {
				dialog.ShowError(err, c.win)
				c.setStatus("Export failed.")
				return
			}
			c.setStatus(fmt.Sprintf("Wrote %d files in %s.", len(files), dir))
			if openAfter && len(files) > 0 {
				if err := exec.Command("xdg-open", files[len(files)-1]).Start(); err != nil {
					dialog.ShowInformation("Print", "The summary is in "+files[len(files)-1]+"; open it to print.", c.win)
				}
			}
		})
	}()
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
