package samples

import (
	"tracelift/record"
	"tracelift/record/wfdb"
)

// RenderRecordFile reads the WFDB record whose header is hea and renders
// durS seconds of its twelve standard leads, from offS, resampled to
// 500 Hz, as a printout in st: the tests' way of drawing a real open
// record.
func RenderRecordFile(hea string, offS, durS float64, st Style) (*Printout, error) {
	rec, err := wfdb.ReadRecord(hea)
	if err != nil {
		return nil, err
	}
	return Render(rec.Window(record.Standard12, 500, offS, durS), st)
}
