// Package compare sets two ECGs of one person side by side: an earlier
// tracing and the current one, each a record.Record with the findings of
// the measurement engine (axis.Findings). It puts the representative beats
// of every lead on one clock (both QRS onsets at time 0), reports the shift
// and gain that remain between them, and lists the changes of the per-lead
// amplitudes (Q, R, S, T, ST at J+60 ms, Q duration, T polarity) and of the
// global measures (rate, PR, QRS, QT, QTc, the frontal QRS/P/T axes, the
// precordial transition, the rhythm).
//
// Every value carries the half-width of a 90 % interval on each side (the
// spread of the side's own beats plus, for a tracing read from a picture, a
// digitization term; see Options.Uncertainty). A change is raised only when
// it exceeds the two sides' combined interval and the threshold the trade
// uses for a change worth attention (thresholds.go names each with its
// source). Where one tracing's leads look exchanged against the other's
// (limb electrodes reversed, two lead labels swapped), the comparison says
// so as a likely reversal, undoes it on the second tracing and compares
// again, instead of reporting the exchange as a change of the heart.
//
// Units as in axis: times in ms, amplitudes in mV, angles in degrees on
// the hexaxial circle, precordial positions 1 (V1) … 6 (V6). The package
// is pure Go: it never imports an image package.
//
// A comparison of two digitized tracings is no diagnosis: lead placement,
// filters and posture change tracings too.
package compare
