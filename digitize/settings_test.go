package digitize

import (
	"fmt"
	"strings"
	"testing"

	"tracelift/calib"
	"tracelift/samples"
)

// A page printed without calibration pulses states its speed and gain
// in its text (common practice); they are read in every font the
// renderer has, in each of the ways it writes them, and a reading that
// fails gives nothing rather than a wrong setting.
func TestPrintedSettings(t *testing.T) {
	settings := [][2]float64{{25, 10}, {50, 5}, {25, 20}, {50, 10}}
	read, total := 0, 0
	for font := 0; font < samples.NumFonts; font++ {
		for form := 0; form < 3; form++ {
			for k, sg := range settings {
				st := samples.DefaultStyle()
				st.Pulses = false
				st.Font = font
				st.SettingsForm = form
				st.SpeedMMPerS, st.GainMMPerMV = sg[0], sg[1]
				st.DPI = []float64{200, 300}[k%2]
				st.LabelPt = []float64{8, 11}[(form+k)%2]
				p := render(t, dipoleRecord(int64(k)), st)
				cal := truthCal(p)
				g := prepare(cal.Ink, cal.PxPerMM)
				rows := findRows(g, cal.PxPerMM, 10)
				speed, gain := printedSettings(g, rows, rowPitch(rows, g, cal.PxPerMM), cal.PxPerMM)
				name := fmt.Sprintf("font %d form %d %g mm/s %g mm/mV", font, form, sg[0], sg[1])
				if (speed != 0 && speed != sg[0]) || (gain != 0 && gain != sg[1]) {
					t.Errorf("%s: read %g mm/s %g mm/mV", name, speed, gain)
				}
				if speed != sg[0] || gain != sg[1] {
					t.Logf("%s: read %g mm/s %g mm/mV", name, speed, gain)
				}
				total += 2
				if speed == sg[0] {
					read++
				}
				if gain == sg[1] {
					read++
				}
			}
		}
	}
	t.Logf("read %d of %d settings", read, total)
	if read < total*9/10 {
		t.Errorf("read %d of %d settings, want 90 %%", read, total)
	}
}

// A single strip names its lead only in its label; the names a strip
// commonly carries are read in every font the renderer has, and a
// failed reading names nothing rather than a wrong lead.
func TestStripLabel(t *testing.T) {
	right, total := 0, 0
	// The name above the strip or below it (both places carts print it,
	// common practice).
	places := []samples.LabelPlace{samples.LabelAbove, samples.LabelBelow}
	for font := 0; font < samples.NumFonts; font++ {
		for k, lead := range []string{"II", "V1", "V5", "I", "III", "V2"} {
			st := samples.DefaultStyle()
			st.LabelPlace = places[(font+k)%len(places)]
			st.Layout = samples.Layout1x1
			st.RhythmLeads = []string{lead}
			st.Font = font
			st.DPI = []float64{200, 300}[k%2]
			st.LabelPt = []float64{8, 10, 12}[(font+k)%3]
			p := render(t, dipoleRecord(int64(k)), st)
			cal := truthCal(p)
			g := prepare(cal.Ink, cal.PxPerMM)
			rows := findRows(g, cal.PxPerMM, 10)
			if len(rows) != 1 {
				t.Fatalf("font %d %s: %d rows", font, lead, len(rows))
			}
			got := stripLabel(g, rows[0].base, rows[0].x0, cal.PxPerMM)
			total++
			switch got {
			case lead:
				right++
			case "":
				t.Logf("font %d %s (place %d): not read", font, lead, st.LabelPlace)
			default:
				t.Errorf("font %d %s (place %d): read as %s", font, lead, st.LabelPlace, got)
			}
		}
	}
	t.Logf("read %d of %d labels", right, total) // 24 of 24 when written
	if right < total*3/4 {
		t.Errorf("read %d of %d labels, want 3/4", right, total)
	}
}

// A lone strip whose label cannot be read keeps the usual II, and the
// warnings say so: a misnamed lead must not pass unnoticed.
func TestStripLabelUnreadWarns(t *testing.T) {
	st := samples.DefaultStyle()
	st.Layout = samples.Layout1x1
	st.RhythmLeads = []string{"V1"}
	st.Labels = false
	p := render(t, dipoleRecord(3), st)
	cal := truthCal(p)
	res := runOn(t, cal, Options{})
	if len(res.Panels) != 1 || res.Panels[0].Lead != "II" {
		t.Fatalf("panels %+v", res.Panels)
	}
	warned := false
	for _, w := range res.Warnings {
		warned = warned || strings.Contains(w, "label could not be read")
	}
	if !warned {
		t.Errorf("no warning that the label went unread: %q", res.Warnings)
	}
}

// A pulse's width gives the paper speed only for a 200 ms pulse, and
// carts draw narrower ones: a 5 mm pulse is 200 ms at 25 mm/s or 100 ms
// at 50 mm/s. The printed speed says which (common practice: a 12-lead
// page prints its speed), through calib.Detect and Run as a page is read.
// Without text a 2.5 mm pulse (200 ms at 12.5 mm/s, or 100 ms at 25) is
// taken as 25 mm/s, the speed 12-lead pages run at (common practice),
// and said to be assumed.
func TestPrintedSpeedOverPulseWidth(t *testing.T) {
	for _, c := range []struct {
		speed, pulseMS float64
		text           bool
		want           float64
		from           string
	}{
		{50, 100, true, 50, calib.SpeedPrinted},
		{25, 100, true, 25, calib.SpeedPrinted},
		{25, 100, false, 25, calib.SpeedAssumed},
		{50, 200, true, 50, calib.SpeedPulse},
		{25, 200, true, 25, calib.SpeedPulse},
	} {
		name := fmt.Sprintf("%g mm/s, %g ms pulse, text %v", c.speed, c.pulseMS, c.text)
		t.Run(name, func(t *testing.T) {
			st := samples.DefaultStyle()
			st.SpeedMMPerS, st.PulseMS = c.speed, c.pulseMS
			st.DPI = 200
			if !c.text {
				st.Header, st.Labels = "", false
			}
			p := render(t, dipoleRecord(5), st)
			cal := detect(t, p.Image)
			cal = runOn(t, cal, Options{}).Calib
			if cal.SpeedMMPerS != c.want || cal.SpeedFrom != c.from {
				t.Errorf("read %g mm/s from %q, want %g from %q (warnings %q)", cal.SpeedMMPerS, cal.SpeedFrom, c.want, c.from, cal.Warnings)
			}
		})
	}
}
