// Package edf writes and reads ECG records as EDF+ files (European Data
// Format, Kemp et al. 1992; EDF+, Kemp and Olivan 2003): a 256-byte
// header, 256 bytes per signal, then data records of 16-bit
// little-endian samples, with an "EDF Annotations" signal carrying
// time-stamped annotation lists (TALs).
//
// Units: samples are written in mV (physical dimension "mV"); time is
// seconds from the file start, which is the record's clock (the first
// data record's time-keeping TAL holds the record's earliest StartS).
package edf

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"tracelift/record"
	"tracelift/record/atomic"
)

// Digital range. EDF has no gap value; this package writes gaps (NaN) as
// −32768, one below the declared digital minimum, and reads any sample
// outside the declared digital range as a gap. Readers that clip or flag
// out-of-range samples see the gap as such; biosig's save2gdf reads it as
// one step below the physical minimum, outside the lead's declared range.
const (
	DigitalMin = -32767
	DigitalMax = 32767
	gapValue   = -32768
)

// AnnotationsLabel is the label of the EDF+ annotation signal.
const AnnotationsLabel = "EDF Annotations"

// Options are the header fields of a written file. The zero value gives
// an anonymised file with an unknown start.
type Options struct {
	// Start is the recording's start (date and time of the file start).
	// Zero means unknown: the header gets 01.01.85 00.00.00 and the
	// recording field "Startdate X", as EDF+ prescribes for an unknown date.
	Start time.Time
	// Equipment names the device in the recording field; default
	// "tracelift". Spaces become '_' (EDF+ subfields hold no spaces).
	Equipment string
}

// Write writes rec as EDF+C (continuous) with data records of 1 s (or the
// shortest of 2, 5, 10, 20, 50, 100 s that gives every lead a whole number
// of samples per record). Each lead is labelled "ECG <lead>" (EDF+
// standard texts: signal type "ECG" and the lead; a lead name of 13 to 16
// bytes goes without the prefix, a longer one is cut), in mV, with its
// physical minimum and maximum taken from its own data (padded by 1% of
// the range, at least 0.01 mV, rounded outward to fit the 8-character
// field). Leads starting later than the earliest are padded with gaps.
// The patient field is "X X X X" (code, sex, birthdate, name all unknown,
// EDF+ section 2.1.3.3). rec.Annotations go into the "EDF Annotations"
// signal: a beat or other coded annotation as its code ("N", or "V: text"
// when it carries text), a note (code "note") as its text.
func Write(w io.Writer, rec *record.Record, opt Options) error {
	f, err := build(rec, opt)
	if err != nil {
		return err
	}
	if _, err := w.Write(f.header()); err != nil {
		return fmt.Errorf("edf: %w", err)
	}
	buf := make([]byte, 0, f.recordBytes())
	for k := 0; k < f.nrec; k++ {
		buf = f.appendRecord(buf[:0], k)
		if _, err := w.Write(buf); err != nil {
			return fmt.Errorf("edf: %w", err)
		}
	}
	return nil
}

// WriteFile writes rec as an EDF+ file at path through atomic.WriteFile.
func WriteFile(path string, rec *record.Record, opt Options) error {
	f, err := build(rec, opt) // check before touching the disk
	if err != nil {
		return err
	}
	return atomic.WriteFile(path, func(w io.Writer) error {
		if _, err := w.Write(f.header()); err != nil {
			return err
		}
		buf := make([]byte, 0, f.recordBytes())
		for k := 0; k < f.nrec; k++ {
			buf = f.appendRecord(buf[:0], k)
			if _, err := w.Write(buf); err != nil {
				return err
			}
		}
		return nil
	}, 0o644)
}

// MaxSamples bounds the samples a file may hold (written or read).
const MaxSamples = 200_000_000

type outSignal struct {
	label      string
	pmin, pmax float64 // as written in the header
	pminS      string
	pmaxS      string
	spr        int // samples per data record
	off        int // gap samples before the data
	mv         []float64
}

type file struct {
	opt     Options
	t0      float64
	durS    float64 // data record duration
	durText string
	nrec    int
	sig     []outSignal
	tals    [][]byte // per data record, annotation bytes after the time-keeping TAL
	annSPR  int
}

func build(rec *record.Record, opt Options) (*file, error) {
	if rec == nil {
		return nil, errors.New("edf: nil record")
	}
	if err := rec.Validate(); err != nil {
		return nil, fmt.Errorf("edf: %w", err)
	}
	f := &file{opt: opt, t0: math.Inf(1)}
	for i := range rec.Signals {
		f.t0 = math.Min(f.t0, rec.Signals[i].StartS)
	}
	f.durS = 0
	for _, d := range []float64{1, 2, 5, 10, 20, 50, 100} {
		ok := true
		for i := range rec.Signals {
			n := rec.Signals[i].RateHz * d
			ok = ok && math.Abs(n-math.Round(n)) < 1e-6 && math.Round(n) >= 1
		}
		if ok {
			f.durS = d
			break
		}
	}
	if f.durS == 0 {
		return nil, fmt.Errorf("edf: the rates of %v cannot be written with whole samples per data record (resample to an integer rate)", rec.Leads())
	}
	f.durText = strconv.FormatFloat(f.durS, 'f', -1, 64)
	seen := map[string]string{}
	total := 0
	for i := range rec.Signals {
		s := &rec.Signals[i]
		o := outSignal{spr: int(math.Round(s.RateHz * f.durS)), mv: s.MV}
		o.label = label(s.Lead)
		if prev, dup := seen[o.label]; dup {
			return nil, fmt.Errorf("edf: leads %q and %q share the label %q (16 characters at most)", prev, s.Lead, o.label)
		}
		seen[o.label] = s.Lead
		o.off = int(math.Round((s.StartS - f.t0) * s.RateHz))
		n := o.off + len(s.MV)
		if n > MaxSamples || total+n > MaxSamples {
			return nil, fmt.Errorf("edf: more than %d samples", MaxSamples)
		}
		total += n
		f.nrec = max(f.nrec, (n+o.spr-1)/o.spr)
		var err error
		if o.pmin, o.pmax, o.pminS, o.pmaxS, err = physRange(s.MV); err != nil {
			return nil, fmt.Errorf("edf: lead %s: %w", s.Lead, err)
		}
		f.sig = append(f.sig, o)
	}
	if f.nrec == 0 {
		f.nrec = 1 // a file of only gaps still has a record for its annotations
	}
	if len(f.sig)+1 > 9999 {
		return nil, errors.New("edf: too many leads")
	}
	// Annotations: each goes in the data record that covers its onset.
	f.tals = make([][]byte, f.nrec)
	anns := append([]record.Annotation(nil), rec.Annotations...)
	sort.SliceStable(anns, func(i, j int) bool { return anns[i].TS < anns[j].TS })
	for _, a := range anns {
		if math.IsNaN(a.TS) || math.IsInf(a.TS, 0) {
			continue
		}
		k := int(math.Floor((a.TS - f.t0) / f.durS))
		k = min(max(k, 0), f.nrec-1)
		f.tals[k] = appendTAL(f.tals[k], a.TS, annotationText(a))
	}
	need := 0
	for k := range f.tals {
		need = max(need, len(timeTAL(f.recordOnset(k)))+len(f.tals[k]))
	}
	f.annSPR = (need + 1) / 2
	if f.annSPR > 1<<20 {
		return nil, errors.New("edf: too many annotations in one data record")
	}
	return f, nil
}

func (f *file) recordOnset(k int) float64 { return f.t0 + float64(k)*f.durS }

// label spells a lead as an EDF+ ECG label, printable ASCII, 16 bytes at
// most: "ECG <lead>", or the lead alone when the prefix would not fit (a
// name beyond 16 bytes is cut).
func label(lead string) string {
	b := []byte("ECG " + lead)
	if len(b) > 16 && len(lead) <= 16 && !hasTypePrefix(lead) {
		b = []byte(lead)
	}
	for i, c := range b {
		if c < 32 || c > 126 {
			b[i] = '_'
		}
	}
	if len(b) > 16 {
		b = b[:16]
	}
	return strings.TrimRight(string(b), " ")
}

func hasTypePrefix(s string) bool {
	return strings.HasPrefix(s, "ECG ") || strings.HasPrefix(s, "EKG ")
}

// physRange returns the padded physical range of the data, formatted
// outward into 8 characters, and its parsed values.
func physRange(mv []float64) (lo, hi float64, loS, hiS string, err error) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, v := range mv {
		if !math.IsNaN(v) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	if math.IsInf(lo, 1) {
		lo, hi = -1, 1 // no data: any valid range
	}
	pad := math.Max(0.01*(hi-lo), 0.01)
	if loS, err = fit8(lo-pad, false); err != nil {
		return
	}
	if hiS, err = fit8(hi+pad, true); err != nil {
		return
	}
	lo, _ = strconv.ParseFloat(loS, 64)
	hi, _ = strconv.ParseFloat(hiS, 64)
	return lo, hi, loS, hiS, nil
}

// fit8 formats v in at most 8 characters with the most decimals, rounding
// up (toward +Inf) or down.
func fit8(v float64, up bool) (string, error) {
	for p := 7; p >= 0; p-- {
		m := math.Pow10(p)
		r := math.Floor(v * m)
		if up {
			r = math.Ceil(v * m)
		}
		s := strconv.FormatFloat(r/m, 'f', p, 64)
		if len(s) <= 8 {
			if strings.Contains(s, ".") {
				s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
			}
			if s == "-0" {
				s = "0"
			}
			return s, nil
		}
	}
	return "", fmt.Errorf("value %g does not fit the 8-character header field", v)
}

// annotationText is the TAL text of an annotation: its code, "code: text",
// or for a note its text alone unless that text would read back as a code.
func annotationText(a record.Annotation) string {
	var s string
	switch {
	case a.Code == "note" && !looksCoded(a.Text):
		s = a.Text
	case a.Text == "":
		s = a.Code
	default:
		s = a.Code + ": " + a.Text
	}
	return strings.Map(func(r rune) rune {
		if r < 32 {
			return ' ' // TAL separators \x00 \x14 \x15 and other controls
		}
		return r
	}, s)
}

// looksCoded reports whether a TAL text reads as a code (a short word
// without spaces, optionally followed by ": text").
func looksCoded(s string) bool {
	c, _, _ := strings.Cut(s, ": ")
	return c != "" && len(c) <= 16 && !strings.ContainsAny(c, " \t")
}

func formatOnset(t float64) string {
	t = math.Round(t*1e6) / 1e6
	s := strconv.FormatFloat(math.Abs(t), 'f', -1, 64)
	if t < 0 {
		return "-" + s
	}
	return "+" + s
}

func timeTAL(onset float64) []byte {
	return []byte(formatOnset(onset) + "\x14\x14\x00")
}

func appendTAL(b []byte, onset float64, text string) []byte {
	b = append(b, formatOnset(onset)...)
	b = append(b, 0x14)
	b = append(b, text...)
	return append(b, 0x14, 0)
}

func (f *file) recordBytes() int {
	n := f.annSPR
	for _, s := range f.sig {
		n += s.spr
	}
	return 2 * n
}

func (f *file) appendRecord(b []byte, k int) []byte {
	for _, s := range f.sig {
		scale := float64(DigitalMax-DigitalMin) / (s.pmax - s.pmin)
		for j := k * s.spr; j < (k+1)*s.spr; j++ {
			d := gapValue
			if i := j - s.off; i >= 0 && i < len(s.mv) && !math.IsNaN(s.mv[i]) {
				d = int(math.Round((s.mv[i]-s.pmin)*scale + DigitalMin))
				d = min(max(d, DigitalMin), DigitalMax)
			}
			b = append(b, byte(d), byte(d>>8))
		}
	}
	a := append(timeTAL(f.recordOnset(k)), f.tals[k]...)
	b = append(b, a...)
	for i := len(a); i < 2*f.annSPR; i++ {
		b = append(b, 0)
	}
	return b
}

func (f *file) header() []byte {
	ns := len(f.sig) + 1
	var h bytes.Buffer
	field := func(s string, n int) {
		if len(s) > n {
			s = s[:n]
		}
		h.WriteString(s)
		h.WriteString(strings.Repeat(" ", n-len(s)))
	}
	field("0", 8)
	field("X X X X", 80)
	equip := strings.Map(func(r rune) rune {
		if r <= 32 || r > 126 {
			return '_'
		}
		return r
	}, f.opt.Equipment)
	if equip == "" {
		equip = "tracelift"
	}
	start := f.opt.Start
	if start.IsZero() {
		field("Startdate X X X "+equip, 80)
		field("01.01.85", 8)
		field("00.00.00", 8)
	} else {
		field("Startdate "+strings.ToUpper(start.Format("02-Jan-2006"))+" X X "+equip, 80)
		field(start.Format("02.01.06"), 8)
		field(start.Format("15.04.05"), 8)
	}
	field(strconv.Itoa(256*(ns+1)), 8)
	field("EDF+C", 44)
	field(strconv.Itoa(f.nrec), 8)
	field(f.durText, 8)
	field(strconv.Itoa(ns), 4)
	each := func(fn func(s outSignal) string, ann string, n int) {
		for _, s := range f.sig {
			field(fn(s), n)
		}
		field(ann, n)
	}
	each(func(s outSignal) string { return s.label }, AnnotationsLabel, 16)
	each(func(outSignal) string { return "" }, "", 80)
	each(func(outSignal) string { return "mV" }, "", 8)
	each(func(s outSignal) string { return s.pminS }, "-1", 8)
	each(func(s outSignal) string { return s.pmaxS }, "1", 8)
	each(func(outSignal) string { return strconv.Itoa(DigitalMin) }, "-32768", 8)
	each(func(outSignal) string { return strconv.Itoa(DigitalMax) }, "32767", 8)
	each(func(outSignal) string { return "" }, "", 80)
	each(func(s outSignal) string { return strconv.Itoa(s.spr) }, strconv.Itoa(f.annSPR), 8)
	each(func(outSignal) string { return "" }, "", 32)
	return h.Bytes()
}
