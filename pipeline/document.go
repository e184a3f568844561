package pipeline

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"tracelift/calib"
	"tracelift/digitize"
)

// ErrNoECGPage is wrapped by the error for a page of a document that the
// quick screen (calib.Screen) passes over: a cover sheet, a page of text.
var ErrNoECGPage = errors.New("pipeline: the page holds no ECG")

// PageNote says why a page of a document was not read.
type PageNote struct {
	Page int    `json:"page"` // from 1
	Why  string `json:"why"`
}

// PageChoice says which page of a document was read and how it was
// chosen.
type PageChoice struct {
	Page int `json:"page"` // from 1
	Of   int `json:"of"`
	// How: "chosen by hand", "the first page that holds an ECG", "the
	// only page".
	How     string     `json:"how"`
	Skipped []PageNote `json:"skipped,omitempty"`
}

// Line is the choice in words, for a terminal.
func (c *PageChoice) Line() string {
	if c == nil {
		return ""
	}
	s := fmt.Sprintf("%d of %d (%s)", c.Page, c.Of, c.How)
	for _, n := range c.Skipped {
		s += fmt.Sprintf("; page %d passed over: %s", n.Page, n.Why)
	}
	return s
}

// notECG reports errors that say a page shows no readable ECG (as opposed
// to a damaged file, a cancelled run or a bug): the page search goes on to
// the next page after them.
func notECG(err error) bool {
	return errors.Is(err, calib.ErrNotECG) || errors.Is(err, digitize.ErrNoTrace) ||
		errors.Is(err, digitize.ErrLayout) || errors.Is(err, calib.ErrNoScale) || errors.Is(err, ErrNoECGPage)
}

// processDocument runs Process on a file: one page as Options say, or
// the search of a document for its first ECG page.
func processDocument(ctx context.Context, path string, opt Options) (*Outcome, error) {
	t0 := time.Now()
	doc, err := calib.OpenDocument(path, opt.Load)
	if err != nil {
		return nil, err
	}
	finish := func(o *Outcome, err error) (*Outcome, error) {
		if o != nil {
			o.Timings.Load = time.Since(t0) - o.Timings.Total()
		}
		return o, err
	}
	if !opt.FindPage || doc.Pages == 1 {
		i := opt.Load.Page
		if opt.Screen && doc.Pages > 1 {
			if s, err := screenPage(doc, i); err != nil {
				return nil, err
			} else if !s.ECG {
				return nil, fmt.Errorf("%s page %d of %d: %s: %w", path, i+1, doc.Pages, s.Why, ErrNoECGPage)
			}
		}
		pg, err := doc.Page(i)
		if err != nil {
			return nil, err
		}
		o, err := ProcessPage(ctx, pg, opt)
		if o != nil && doc.Pages > 1 {
			o.Pages = &PageChoice{Page: i + 1, Of: doc.Pages, How: "chosen by hand"}
			if opt.Screen {
				o.Pages.How = "one page of the document"
			}
		}
		return finish(o, err)
	}
	// The search: pages the screen passes, in order; then, should none of
	// them read, the pages it passed over (the screen may be wrong).
	var skipped, notes []PageNote
	var later []int
	try := func(i int, why string) (*Outcome, error) {
		pg, err := doc.Page(i)
		if err != nil {
			return nil, err
		}
		o, err := ProcessPage(ctx, pg, opt)
		if err == nil {
			o.Pages = &PageChoice{Page: i + 1, Of: doc.Pages, How: why, Skipped: append([]PageNote(nil), skipped...)}
			return o, nil
		}
		return o, err
	}
	for i := 0; i < doc.Pages; i++ {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		s, err := screenPage(doc, i)
		if err != nil {
			return nil, err
		}
		if !s.ECG {
			skipped = append(skipped, PageNote{Page: i + 1, Why: s.Why})
			later = append(later, i)
			continue
		}
		o, err := try(i, "the first page that holds an ECG")
		if err == nil {
			return finish(o, nil)
		}
		if !notECG(err) {
			return finish(o, err)
		}
		note := PageNote{Page: i + 1, Why: "looked like an ECG but could not be read: " + strings.TrimPrefix(err.Error(), path+": ")}
		skipped = append(skipped, note)
		notes = append(notes, note)
	}
	// A page the screen passed over is taken only when its own grid or
	// calibration pulse gives the scale: the tracer finds "traces" in
	// lines of text, and a sheet's size is no proof of an ECG.
	for _, i := range later {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		o, err := try(i, "the only page that could be read; the quick look had passed it over")
		if err == nil && o.Calib != nil && (o.Calib.Source == "grid" || o.Calib.Source == "pulse") {
			return finish(o, nil)
		}
		if err != nil && !notECG(err) {
			return finish(o, err)
		}
	}
	var parts []string
	for _, n := range skipped {
		parts = append(parts, fmt.Sprintf("page %d: %s", n.Page, n.Why))
	}
	return nil, fmt.Errorf("%s: none of its %d pages holds an ECG that could be read (%s); check that this is the right document, or choose a page with --page: %w",
		path, doc.Pages, strings.Join(parts, "; "), calib.ErrNotECG)
}

func screenPage(doc *calib.Document, i int) (calib.Screening, error) {
	pv, err := doc.Preview(i)
	if err != nil {
		return calib.Screening{}, err
	}
	return calib.Screen(pv), nil
}

// SourceJSON is the "source" object of the JSON output: what was taken
// from the file itself.
type SourceJSON struct {
	Format string      `json:"format"`
	Page   int         `json:"page"` // from 1
	Pages  int         `json:"pages"`
	Choice *PageChoice `json:"page_choice,omitempty"`
	// Resolution is what the file states about its pixels and what was
	// done with it (resampled to square pixels).
	Resolution *calib.Resolution `json:"resolution,omitempty"`
	// ResolutionCheck compares the file's resolution with the grid's.
	ResolutionCheck string `json:"resolution_check,omitempty"`
}

func (o *Outcome) source() *SourceJSON {
	pg := o.Page
	if pg == nil {
		return nil
	}
	s := &SourceJSON{Format: pg.Format, Page: pg.PageIndex + 1, Pages: pg.PageCount, Choice: o.Pages}
	if pg.Stated.X > 0 || pg.Stated.Note != "" {
		r := pg.Stated
		s.Resolution = &r
		s.ResolutionCheck = ResolutionCheck(pg, o.Calib)
	}
	return s
}

// ResolutionCheck compares the resolution the file states (after any
// resampling to square pixels) with the scale the grid measures; "" when
// the file states none in a real unit.
func ResolutionCheck(pg *calib.Page, cal *calib.Result) string {
	if pg == nil || pg.DPIX <= 0 || pg.DPIY <= 0 {
		return ""
	}
	if cal == nil || cal.Source != "grid" {
		src := "nothing"
		if cal != nil {
			src = "the " + cal.Source
		}
		return fmt.Sprintf("not checked: no grid seen (the scale comes from %s)", src)
	}
	dx, dy := pg.DPIX/25.4, pg.DPIY/25.4
	if cal.Turned&1 == 1 {
		dx, dy = dy, dx
	}
	ex, ey := cal.PxPerMMX/dx-1, cal.PxPerMMY/dy-1
	const agree = 0.03 // the 3 % calib warns beyond
	verdict := "agrees"
	if math.Abs(ex) > agree || math.Abs(ey) > agree {
		verdict = "disagrees (the grid is used)"
	}
	return fmt.Sprintf("%s: the grid measures %.1f × %.1f dpi, %+.1f %% and %+.1f %% from the file's %.1f × %.1f",
		verdict, cal.PxPerMMX*25.4, cal.PxPerMMY*25.4, 100*ex, 100*ey, dx*25.4, dy*25.4)
}
