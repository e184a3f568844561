package model

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"tracelift/record"
)

// PanelView is a panel as shown after the corrections: its current lead,
// moved box and baseline, and how confident the tracing of it was.
type PanelView struct {
	Panel              // Lead is the current (reassigned) lead name without sign
	Printed    string  // the name as read from the printout ("-aVR")
	Sign       float64 // -1 for an inverted (Cabrera -aVR) panel, else 1
	Confidence float64 // 0..1, NaN when unknown
}

// Change is one measurement that an edit changed.
type Change struct {
	Label, Before, After string
}

// Model holds one open printout and its corrections.
type Model struct {
	b        Backend
	src      Source
	a        *Analysis
	settings Settings

	corrs []record.Correction // applied, in order
	redo  []record.Correction // undone, most recent last

	baseKey    string // box corrections the base was derived with
	base       *record.Record
	basePanels []Panel

	rec        *record.Record
	views      []PanelView
	sum        *Summary
	quality    map[string]float64 // per record lead, as measured
	measureErr error
	applyErr   error
	changes    []Change

	projectPath string // "" = no autosave (the demo)
	saveErr     error

	// Now stamps corrections; tests may fix it.
	Now func() time.Time
}

// New returns an empty model over a backend.
func New(b Backend) *Model { return &Model{b: b, Now: time.Now} }

// Load reads a source: the slow step, run it in a goroutine. It does not
// touch any model.
func Load(ctx context.Context, b Backend, src Source, s Settings, p Progress) (*Analysis, error) {
	if p == nil {
		p = func(string, float64) {}
	}
	a, err := b.Analyze(ctx, src, s, p)
	if err != nil {
		return nil, err
	}
	if a == nil || a.Raw == nil {
		return nil, errors.New("model: the reader returned nothing")
	}
	return a, nil
}

// Install makes a loaded analysis the open printout, with the settings it
// was read with and the corrections to apply (from the project file, or
// kept across a re-read). projectPath is where to autosave ("" = never).
// Corrections that no longer fit (a lead that is not there after a layout
// change) are kept and reported by ApplyErr; the ones before them apply.
func (m *Model) Install(src Source, a *Analysis, s Settings, corrs []record.Correction, projectPath string) error {
	m.src, m.a, m.settings = src, a, s
	m.corrs = append([]record.Correction(nil), corrs...)
	m.redo = nil
	m.baseKey, m.base, m.basePanels = "", nil, nil
	m.projectPath = projectPath
	m.changes = nil
	m.recompute()
	return m.applyErr
}

// Loaded reports whether a printout is open.
func (m *Model) Loaded() bool { return m.a != nil }

// Analysis returns what the reader found (nil before Install).
func (m *Model) Analysis() *Analysis { return m.a }

// Source returns what is open.
func (m *Model) Source() Source { return m.src }

// Settings returns the current overrides.
func (m *Model) Settings() Settings { return m.settings }

// Record returns the corrected record.
func (m *Model) Record() *record.Record { return m.rec }

// Summary returns the measurements of the corrected record (nil when they
// failed; see MeasureErr).
func (m *Model) Summary() *Summary { return m.sum }

// MeasureErr says why the measurements failed.
func (m *Model) MeasureErr() error { return m.measureErr }

// ApplyErr says which correction did not fit the current reading.
func (m *Model) ApplyErr() error { return m.applyErr }

// SaveErr says why the last autosave failed (nil when it worked).
func (m *Model) SaveErr() error { return m.saveErr }

// ProjectPath returns where corrections are autosaved ("" = nowhere).
func (m *Model) ProjectPath() string { return m.projectPath }

// Panels returns the panels as shown now.
func (m *Model) Panels() []PanelView { return m.views }

// Corrections returns a copy of the applied corrections.
func (m *Model) Corrections() []record.Correction {
	return append([]record.Correction(nil), m.corrs...)
}

// Changes returns what the last edit, undo or redo changed in the
// measurements.
func (m *Model) Changes() []Change { return m.changes }

// CanUndo and CanRedo report whether there is something to undo or redo.
func (m *Model) CanUndo() bool { return len(m.corrs) > 0 }

// CanRedo reports whether there is an undone edit to redo.
func (m *Model) CanRedo() bool { return len(m.redo) > 0 }

// Edit applies one correction, remeasures and autosaves. A correction
// that does not fit (a lead that is not there) is refused and changes
// nothing.
func (m *Model) Edit(c record.Correction) error {
	if m.a == nil {
		return errors.New("model: nothing is open")
	}
	if err := record.CheckCorrection(&c); err != nil {
		return fmt.Errorf("model: %w", err)
	}
	if c.At.IsZero() && m.Now != nil {
		c.At = m.Now().UTC()
	}
	prevCorrs, prevRedo := m.corrs, m.redo
	m.corrs = append(append([]record.Correction(nil), m.corrs...), c)
	m.redo = nil
	before := m.sum
	m.recompute()
	if m.applyErr != nil {
		err := m.applyErr
		m.corrs, m.redo = prevCorrs, prevRedo
		m.recompute()
		return err
	}
	m.changes = Diff(before, m.sum)
	m.autosave()
	return nil
}

// Undo drops the last correction. The record and measurements are those
// of the shorter list, bit for bit (they are recomputed from the raw
// reading).
func (m *Model) Undo() bool {
	if len(m.corrs) == 0 {
		return false
	}
	before := m.sum
	last := m.corrs[len(m.corrs)-1]
	m.corrs = append([]record.Correction(nil), m.corrs[:len(m.corrs)-1]...)
	m.redo = append(m.redo, last)
	m.recompute()
	m.changes = Diff(before, m.sum)
	m.autosave()
	return true
}

// Redo applies the last undone correction again.
func (m *Model) Redo() bool {
	if len(m.redo) == 0 {
		return false
	}
	before := m.sum
	c := m.redo[len(m.redo)-1]
	m.redo = m.redo[:len(m.redo)-1]
	m.corrs = append(append([]record.Correction(nil), m.corrs...), c)
	m.recompute()
	m.changes = Diff(before, m.sum)
	m.autosave()
	return true
}

// ExportJob returns what an export of the open printout writes: the
// corrected record, the panels where the boxes are now and the findings on
// screen.
func (m *Model) ExportJob(dir, stem string, formats []string) ExportJob {
	return ExportJob{Record: m.rec, Panels: append([]Panel(nil), m.basePanels...), Summary: m.sum,
		MeasureErr: m.measureErr, Dir: dir, Stem: stem, Formats: append([]string(nil), formats...)}
}

// SetProjectPath changes where corrections are saved ("" stops saving).
func (m *Model) SetProjectPath(p string) { m.projectPath = p }

// Save writes the project file now (also done after every edit).
func (m *Model) Save() error {
	m.autosave()
	return m.saveErr
}

// Project returns the project file's content for the current state.
func (m *Model) Project() *Project {
	p := &Project{
		Version:     ProjectVersion,
		Software:    "tracelift",
		Settings:    m.settings,
		Corrections: m.Corrections(),
	}
	if p.Corrections == nil {
		p.Corrections = []record.Correction{}
	}
	if m.a != nil {
		p.ImageSHA256 = m.a.ImageSHA256
	}
	if m.src.Path != "" {
		p.Image = baseName(m.src.Path)
	}
	if m.Now != nil {
		p.SavedAt = m.Now().UTC()
	}
	return p
}

func (m *Model) autosave() {
	if m.projectPath == "" || m.a == nil {
		return
	}
	m.saveErr = SaveProjectFile(m.projectPath, m.Project())
}

// recompute derives the corrected record, the panel views and the
// measurements from the raw reading and the correction list. It is the
// only place they are made, so any list gives the same state whichever
// way it was reached.
func (m *Model) recompute() {
	m.applyErr, m.measureErr = nil, nil
	a := m.a
	panels := append([]Panel(nil), a.Panels...)
	labels, _ := panelLabels(panels)

	// Box moves and panels drawn by hand first: they change which pixels
	// make the signals.
	var boxKey strings.Builder
	moved := false
	pxPerS := a.PxPerMM * a.SpeedMMPerS
	walk(m.corrs, labels, func(c *record.Correction, cur []string) {
		switch c.Kind {
		case record.CorrBox:
			if i := nearestPanel(panels, cur, c.Lead, c.Box); i >= 0 {
				// The zero line stays where it was (the Baseline tool
				// moves it): a box move changes which pixels are read,
				// not their mV. A resize (the width changed) moves the
				// time window with the edges: the page's clock stays, so
				// a column keeps its time.
				was := panels[i].Box
				copy(panels[i].Box[:], c.Box)
				if w := (c.Box[2] - c.Box[0]) - (was[2] - was[0]); math.Abs(w) > 1e-6 && pxPerS > 0 {
					panels[i].T0S += (c.Box[0] - was[0]) / pxPerS
					panels[i].T1S += (c.Box[2] - was[2]) / pxPerS
				}
				moved = true
				fmt.Fprintf(&boxKey, "%d:%v;", i, c.Box)
			}
		case record.CorrDrawnPanel:
			p := Panel{Lead: strings.TrimSpace(c.Lead), Drawn: true, Row: -1, Col: -1}
			copy(p.Box[:], c.Box)
			panels = append(panels, p)
			moved = true
			fmt.Fprintf(&boxKey, "+%s:%v;", c.Lead, c.Box)
		}
	})
	key := boxKey.String()
	if !moved {
		m.base, m.basePanels, m.baseKey = a.Raw, a.Panels, ""
	} else if m.base == nil || key != m.baseKey {
		rec, ps, err := m.b.Resignal(a, panels)
		if err != nil {
			m.applyErr = fmt.Errorf("model: %w", err)
			rec, ps = a.Raw, a.Panels
		}
		m.base, m.basePanels, m.baseKey = rec, ps, key
	}

	rec, err := record.Apply(m.base, m.corrs)
	if err != nil {
		m.applyErr = err
		// Keep what fits: the longest prefix that applies.
		rec = m.base
		for k := range m.corrs {
			r, err := record.Apply(rec, m.corrs[k:k+1])
			if err != nil {
				break
			}
			rec = r
		}
	}
	m.rec = rec

	// Panel views: the current names and baselines.
	views := make([]PanelView, len(m.basePanels))
	bl, bs := panelLabels(m.basePanels)
	for i, p := range m.basePanels {
		views[i] = PanelView{Panel: p, Printed: p.Lead, Sign: bs[i], Confidence: math.NaN()}
		views[i].Lead = bl[i]
		if q, ok := a.Quality[p.Lead]; ok && !p.Drawn {
			views[i].Confidence = q
		}
	}
	pxPerMV := a.PxPerMM * a.GainMMPerMV
	// walked to the names after every reassignment, from the reading's
	// panels (the drawn ones join as their corrections come)
	final, _ := panelLabels(a.Panels)
	final = walk(m.corrs, final, func(c *record.Correction, cur []string) {
		if c.Kind != record.CorrBaseline {
			return
		}
		lead := record.CanonicalLead(c.Lead)
		for i := range views {
			if i < len(cur) && cur[i] == lead {
				views[i].BaselineY -= views[i].Sign * c.OffsetMV * pxPerMV
			}
		}
	})
	for i := range views {
		if i < len(final) {
			views[i].Lead = final[i]
		}
	}
	m.views = views

	// Confidence per record lead: the lowest of its panels.
	quality := map[string]float64{}
	for _, v := range views {
		if math.IsNaN(v.Confidence) {
			continue
		}
		if q, ok := quality[v.Lead]; !ok || v.Confidence < q {
			quality[v.Lead] = v.Confidence
		}
	}
	m.quality = quality
	m.sum, m.measureErr = m.b.Measure(rec, quality)
	if m.measureErr != nil {
		m.sum = nil
	}
}

// panelLabels returns each panel's lead without its sign, and the sign.
func panelLabels(ps []Panel) ([]string, []float64) {
	labels := make([]string, len(ps))
	signs := make([]float64, len(ps))
	for i, p := range ps {
		n := strings.TrimSpace(p.Lead)
		signs[i] = 1
		if strings.HasPrefix(n, "-") || strings.HasPrefix(n, "−") {
			n = strings.TrimPrefix(strings.TrimPrefix(n, "-"), "−")
			signs[i] = -1
		}
		labels[i] = record.CanonicalLead(n)
	}
	return labels, signs
}

// walk visits the corrections in order with the panels' current lead
// names, renaming them at each reassignment the way record.Apply renames
// the signals (a swap when the new name is taken), and adding the name of
// each panel drawn by hand after its correction. labels is updated in
// place; the list with the drawn panels added is returned.
func walk(corrs []record.Correction, labels []string, visit func(c *record.Correction, cur []string)) []string {
	for k := range corrs {
		c := &corrs[k]
		visit(c, labels)
		switch c.Kind {
		case record.CorrDrawnPanel:
			l, _ := panelLabels([]Panel{{Lead: c.Lead}})
			labels = append(labels, l[0])
		case record.CorrAssign:
			from, to := record.CanonicalLead(c.Lead), record.CanonicalLead(c.NewLead)
			for i, l := range labels {
				switch l {
				case from:
					labels[i] = to
				case to:
					labels[i] = from
				}
			}
		}
	}
	return labels
}

// nearestPanel finds the panel named lead whose box centre is nearest to
// box's (a lead can be drawn twice: a panel and a rhythm strip).
func nearestPanel(ps []Panel, labels []string, lead string, box []float64) int {
	lead = record.CanonicalLead(lead)
	best, bestD := -1, math.Inf(1)
	cx, cy := (box[0]+box[2])/2, (box[1]+box[3])/2
	for i, p := range ps {
		if labels[i] != lead {
			continue
		}
		d := math.Hypot((p.Box[0]+p.Box[2])/2-cx, (p.Box[1]+p.Box[3])/2-cy)
		if d < bestD {
			best, bestD = i, d
		}
	}
	return best
}

func baseName(p string) string {
	if i := strings.LastIndexAny(p, `/\`); i >= 0 {
		return p[i+1:]
	}
	return p
}
