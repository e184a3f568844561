package pipeline

import (
	"fmt"

	"tracelift/record/ledger"
	"tracelift/record/wfdb"
)

// OutputNames returns the file names Export writes for stem in the given
// formats (the WFDB annotation file included, written when beats are found).
func OutputNames(stem string, formats []string) []string {
	var out []string
	for _, f := range formats {
		if f == FormatWFDB {
			out = append(out, stem+".dat", stem+".hea", stem+".atr")
		} else {
			out = append(out, stem+"."+f)
		}
	}
	return out
}

// PageSource is the ledger source of the outputs of page pg: its image
// file (links resolved) and, for a multi-page file, the page from 1.
func PageSource(o *Outcome) ledger.Source {
	if o == nil || o.Page == nil {
		return ledger.Source{Path: "(no page)"}
	}
	page := 0
	if o.Page.PageCount > 1 {
		page = o.Page.PageIndex + 1
	}
	return ledger.FileSource(o.Page.Path, page)
}

// claimOutputs checks, before anything is written, that every output may
// go into dir: a WFDB record name is plain, and no destination is the
// page's image or another input, or a file tracelift did not write for this
// page (record/ledger). It records the outputs in dir's ledger.
func claimOutputs(o *Outcome, dir, stem string, formats []string, opt ExportOptions) error {
	for _, f := range formats {
		if f == FormatWFDB {
			if err := wfdb.CheckName(stem); err != nil {
				return fmt.Errorf("%w (nothing was written)", err)
			}
		}
	}
	inputs := append([]string(nil), opt.Inputs...)
	if o.Page != nil && o.Page.Path != "" {
		inputs = append(inputs, o.Page.Path)
	}
	return ledger.Claim(dir, PageSource(o), OutputNames(stem, formats), inputs)
}
