package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"time"

	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/samples"
)

// benchOutside digitizes every printout of another renderer in dir and
// scores it against the truth written beside it, the way that truth's
// README asks (record.CompareStrict; a page that fails scores 0 dB on
// every lead drawn). It prints one line per page and the medians.
func benchOutside(dir string, stdout, stderr io.Writer) int {
	pages, err := samples.ReadOutsideDir(dir)
	if err != nil {
		fmt.Fprintln(stderr, "tracelift-cli bench:", err)
		return 1
	}
	fmt.Fprintln(stdout, "page       condition layout  SNR dB (med/min)  missing  scale err %  gain  speed  t0 err ms  axis err°  ms    status")
	var all []float64
	for _, p := range pages {
		start := time.Now()
		o, err := pipeline.Process(context.Background(), p.Image, pipeline.Options{})
		el := time.Since(start)
		var est *record.Record
		status := "ok"
		if err != nil {
			status = "failed: " + err.Error()
		} else {
			est = o.Digitized.Record
		}
		var snr []float64
		missing := 0
		t0err := math.NaN()
		var shifts []float64
		for _, a := range record.CompareRecordStrict(p.Truth, est) {
			snr = append(snr, a.SNRdB)
			if est != nil && est.Lead(a.Lead) == nil {
				missing++
			} else if est != nil {
				shifts = append(shifts, a.ShiftS)
			}
		}
		if len(shifts) > 0 {
			t0err = 1000 * median(shifts)
		}
		all = append(all, snr...)
		scale, gain, speed, axErr := math.NaN(), math.NaN(), math.NaN(), math.NaN()
		if o != nil && o.Calib != nil {
			scale = 100 * (math.Sqrt(o.Calib.PxPerMMX*o.Calib.PxPerMMY)/p.PxPerMM - 1)
			gain, speed = o.Calib.GainMMPerMV, o.Calib.SpeedMMPerS
		}
		if p.HasAxis && o != nil && o.Findings != nil {
			axErr = angleDiff(float64(o.Findings.Axis.QRSDeg), p.QRSAxisDeg)
		}
		fmt.Fprintf(stdout, "%-10s %-9s %-6s  %6.1f / %6.1f   %5d    %+7.2f     %4.0f  %5.0f  %+8.1f  %+8.1f  %5.0f  %s\n",
			p.Name, p.Condition, p.Layout, median(snr), minOf(snr), missing, scale, gain, speed, t0err, axErr, ms(el), status)
	}
	fmt.Fprintf(stdout, "all leads: median %.1f dB over %d leads of %d pages; peak resident memory %s\n", median(all), len(all), len(pages), peakRSS())
	return 0
}

func minOf(v []float64) float64 {
	m := math.Inf(1)
	for _, x := range v {
		m = math.Min(m, x)
	}
	return m
}
