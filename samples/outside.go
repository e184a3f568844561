package samples

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"tracelift/record"
)

// OutsidePage is a printout drawn by a renderer that is not ours, with the
// truth its maker wrote beside it (../shared/data/outside-printouts; its
// README gives the format). Such pages check that the tracer reads
// pictures it was not tuned on.
type OutsidePage struct {
	Name        string  // the case's name, e.g. "outside01"
	Image       string  // path of the picture
	Condition   string  // clean, phone, fax, …
	Layout      string  // as the truth spells it (3x4+R, 6x2, 1x1)
	DPI         float64 // as printed
	PxPerMM     float64 // true scale of the page as printed
	GainMMPerMV float64
	SpeedMMPerS float64
	T0XPx       float64 // x of time 0 on the page before the condition was applied
	// QRSAxisDeg is the frontal QRS axis of the heart vector for a
	// synthetic page (augmented leads taken ×2/√3); NaN-free only when
	// HasAxis.
	QRSAxisDeg float64
	HasAxis    bool
	Truth      *record.Record // every lead drawn, each over its printed window
}

type outsideJSON struct {
	Case      string  `json:"case"`
	Image     string  `json:"image"`
	Layout    string  `json:"layout"`
	DPI       float64 `json:"dpi"`
	PxPerMM   float64 `json:"px_per_mm"`
	Speed     float64 `json:"paper_speed_mm_per_s"`
	Gain      float64 `json:"gain_mm_per_mV"`
	Condition string  `json:"condition"`
	FsHz      float64 `json:"fs_hz"`
	Geometry  struct {
		T0XPx float64 `json:"t0_x_px"`
	} `json:"geometry"`
	Synthetic *struct {
		QRSAxisNet float64 `json:"qrs_axis_net_vector_deg"`
	} `json:"synthetic_details"`
	Leads map[string]struct {
		T0 float64   `json:"t0"`
		T1 float64   `json:"t1"`
		MV []float64 `json:"mV"`
	} `json:"leads"`
}

// ReadOutside reads one truth file (outsideNN.json); the picture it names
// is taken from the same folder.
func ReadOutside(jsonPath string) (*OutsidePage, error) {
	b, err := os.ReadFile(jsonPath)
	if err != nil {
		return nil, err
	}
	var j outsideJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return nil, fmt.Errorf("samples: %s: %w", jsonPath, err)
	}
	if j.FsHz <= 0 || len(j.Leads) == 0 || j.Image == "" {
		return nil, fmt.Errorf("samples: %s: no leads, rate or picture", jsonPath)
	}
	p := &OutsidePage{
		Name: j.Case, Image: filepath.Join(filepath.Dir(jsonPath), j.Image),
		Condition: j.Condition, Layout: j.Layout, DPI: j.DPI, PxPerMM: j.PxPerMM,
		GainMMPerMV: j.Gain, SpeedMMPerS: j.Speed, T0XPx: j.Geometry.T0XPx,
		Truth: &record.Record{Name: j.Case},
	}
	if j.Synthetic != nil {
		p.QRSAxisDeg, p.HasAxis = j.Synthetic.QRSAxisNet, true
	}
	for name, l := range j.Leads {
		p.Truth.Signals = append(p.Truth.Signals, record.Signal{
			Lead: record.CanonicalLead(name), RateHz: j.FsHz, StartS: l.T0, MV: l.MV,
		})
	}
	sort.Slice(p.Truth.Signals, func(a, b int) bool {
		return leadOrder(p.Truth.Signals[a].Lead) < leadOrder(p.Truth.Signals[b].Lead)
	})
	return p, nil
}

// ReadOutsideDir reads every outside*.json truth file of dir, in name order.
func ReadOutsideDir(dir string) ([]*OutsidePage, error) {
	names, err := filepath.Glob(filepath.Join(dir, "*.json"))
	if err != nil {
		return nil, err
	}
	sort.Strings(names)
	var out []*OutsidePage
	for _, n := range names {
		if !strings.HasPrefix(filepath.Base(n), "outside") {
			continue
		}
		p, err := ReadOutside(n)
		if err != nil {
			return nil, err
		}
		out = append(out, p)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("samples: no outside*.json truth files in %s", dir)
	}
	return out, nil
}

func leadOrder(l string) int {
	for i, s := range record.Standard12 {
		if s == l {
			return i
		}
	}
	return len(record.Standard12)
}
