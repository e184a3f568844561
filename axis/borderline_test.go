package axis

import (
	"strings"
	"testing"
)

// The frontal axis categories of AHA/ACCF/HRS 2009 (normal −30° to +90°,
// left −30° to −90°, right +90° to +180°, extreme beyond) and the rate
// limits of 50 and 100 bpm used by flags: an interval that crosses one
// names both sides; one that does not, names one.
func TestBorderlines(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name     string
		v, lo, h float64
		want     string
	}{
		{"inside normal", 45, 35, 55, ""},
		{"across -30", -28, -40, -16, "normal or left"},
		{"across +90", 88, 80, 100, "normal or right"},
		{"across -90", -92, -100, -80, "extreme or left"},
		{"across 180", 178, 170, 190, "right or extreme"},
		{"whole circle", 0, -200, 200, "normal or extreme or left or right"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			f := &Findings{HeartRateBPM: NaN(), Axis: Axes{QRSDeg: Num(c.v), QRSDegCI90: [2]Num{Num(c.lo), Num(c.h)}}}
			f.Axis.QRSCategory = Category(c.v)
			borderlines(f)
			got := f.Axis.QRSCategoryRange
			if c.want == "" {
				if got != "" {
					t.Errorf("range %q, want none", got)
				}
				return
			}
			// Order after the value's own category does not matter.
			gs, ws := strings.Split(got, " or "), strings.Split(c.want, " or ")
			if len(gs) != len(ws) || gs[0] != Category(c.v) {
				t.Errorf("range %q, want %q", got, c.want)
			}
		})
	}
	f := &Findings{HeartRateBPM: 98, HeartRateCI90: [2]Num{94, 103}, Axis: Axes{QRSDeg: NaN()}}
	borderlines(f)
	flags(f)
	if len(f.Borderline) != 1 || f.Borderline[0].Below != "normal rate" || f.Borderline[0].Above != "tachycardia" {
		t.Fatalf("rate 98 [94, 103]: %+v", f.Borderline)
	}
	for _, fl := range f.Flags {
		if fl.Code == "tachycardia" {
			t.Errorf("a borderline rate is flagged as tachycardia")
		}
	}
}

// The transition and the R-wave progression come from the same
// amplitudes and must not contradict: with R/|S| crossing 1 between V3
// and V4 (a normal transition, common practice) a small R in V3 raises no
// poor-progression flag; with the crossing after V5 (late) one flag says
// both.
func TestTransitionAndProgressionAgree(t *testing.T) {
	t.Parallel()
	r := []float64{0.2, 0.15, 0.18, 0.9, 1.2, 1.0}
	for _, c := range []struct {
		s    []float64
		prwp bool
	}{
		{[]float64{-1.0, -1.2, -0.5, -0.3, -0.2, -0.1}, false}, // R/S 0.36 at V3, 3 at V4: V3/V4
		{[]float64{-1.0, -1.2, -1.0, -1.5, -1.0, -0.3}, true},  // R/S < 1 until V6
	} {
		f := &Findings{HeartRateBPM: NaN(), Axis: Axes{QRSDeg: NaN()}}
		pos, label, class, ok := transition(r, c.s)
		if !ok {
			t.Fatal("no transition")
		}
		f.TransitionAt, f.Transition, f.TransitionCl = Num(pos), label, class
		for _, v := range r {
			f.RProgression = append(f.RProgression, Num(v))
		}
		flags(f)
		var codes []string
		for _, fl := range f.Flags {
			codes = append(codes, fl.Code)
		}
		got := strings.Contains(strings.Join(codes, " "), "poor_r_progression")
		if got != c.prwp || (c.prwp && strings.Contains(strings.Join(codes, " "), "transition_late")) {
			t.Errorf("transition %s (%s): flags %v", label, class, codes)
		}
	}
}
