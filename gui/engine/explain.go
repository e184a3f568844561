package engine

import (
	"context"
	"errors"
	"io/fs"
	"path/filepath"
	"regexp"
	"strings"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/compare"
	"tracelift/digitize"
	"tracelift/pipeline"
)

// Explanation is an error put in the user's words: what happened, the
// program's own details (without its package names, each said once), and
// what the user can do about this kind of error.
type Explanation struct {
	What   string
	Detail string
	Advice string
	// Retry says whether reading again with settings given by hand (a
	// scale, a turn, a layout) can help: not for a file that is no picture.
	Retry bool
}

// String is the message a dialog shows.
func (e Explanation) String() string {
	parts := []string{e.What}
	if e.Detail != "" && !strings.EqualFold(strings.TrimSuffix(e.Detail, "."), strings.TrimSuffix(e.What, ".")) {
		parts = append(parts, e.Detail)
	}
	if e.Advice != "" {
		parts = append(parts, e.Advice)
	}
	return strings.Join(parts, "\n\n")
}

// Explain says what err means to the person at the window. The advice
// fits the kind of error: a picture that is no ECG is not helped by a
// sharper scan, a missing scale is.
func Explain(err error) Explanation {
	if err == nil {
		return Explanation{}
	}
	var ce *CompareError
	if errors.As(err, &ce) && !errors.Is(err, context.Canceled) {
		in := Explain(ce.Err)
		in.What = "The earlier tracing, " + filepath.Base(ce.Earlier) + ", could not be compared with the one on screen. " + in.What
		if in.Advice == "" {
			in.Advice = tracingKinds
		}
		in.Retry = false
		return in
	}
	e := Explanation{Detail: Plain(err)}
	switch {
	case errors.Is(err, context.Canceled):
		e.What, e.Detail = "The reading was stopped.", ""
	case errors.Is(err, calib.ErrFormat):
		e.What = "The file is not a picture this program can open, or it is damaged."
		e.Advice = "Open a PNG, JPEG, TIFF or PDF file. If it is one, save it again from the program that made it."
	case errors.Is(err, calib.ErrTooBig):
		e.What = "The picture is too large to open."
		e.Advice = "Scan at 300 dpi (plenty for a printout), or crop the picture to the ECG paper."
	case errors.Is(err, calib.ErrNotECG):
		e.Retry = true
		e.What = "This picture does not look like an ECG printout: no paper grid and no trace were found on it."
		e.Advice = "Open a photo or scan of the ECG paper itself. If it is one, turn it with the Reading tab's Turn buttons when it lies sideways."
	case errors.Is(err, calib.ErrNoScale):
		e.Retry = true
		e.What = "The paper's scale could not be measured: there is no grid or calibration pulse to measure it by."
		e.Advice = "Type the scale in px/mm on the Reading tab, or pick the Scale tool and click two grid lines a known distance apart; then press \"Read again with these\"."
	case errors.Is(err, digitize.ErrLayout):
		e.Retry = true
		e.What = "The rows of traces found do not fit the layout chosen."
		e.Advice = "Choose another layout on the Reading tab, or \"" + "Found automatically" + "\", and read again."
	case errors.Is(err, digitize.ErrNoTrace):
		e.Retry = true
		e.What = "The grid was found, but no rows of traces on it."
		e.Advice = "Check that the picture shows the traces (not a blank or cropped sheet). A page lying sideways or mirrored can be turned on the Reading tab; faint traces read better from a sharper scan."
	case errors.Is(err, pipeline.ErrNotTracing):
		e.What = "The file is not a tracing this program reads."
		e.Advice = tracingKinds
	case errors.Is(err, axis.ErrNoBeats), errors.Is(err, axis.ErrNoLead), errors.Is(err, axis.ErrTooShort):
		e.What = "No heartbeats could be measured on the tracing."
		e.Advice = "Check that it is an ECG of several seconds whose leads are named as the standard ones (I, II, V1 …)."
	case errors.Is(err, compare.ErrNothingInCommon):
		e.What = "The two tracings have no lead with a measured beat in common, so they cannot be compared."
		e.Advice = "Check that the earlier tracing holds the same leads; open it alone first to see whether its beats are found."
	case errors.Is(err, pipeline.ErrNoPDFWriter):
		e.What = "This build cannot write the PDF summary."
		e.Advice = "Export the other formats; report the problem to whoever installed the program."
	case errors.Is(err, fs.ErrNotExist):
		e.What = "The file or folder is not there (moved, renamed or on a drive that is gone)."
		e.Advice = "Open it again from where it is now."
	case errors.Is(err, fs.ErrPermission):
		e.What = "This program is not allowed to use that file or folder."
		e.Advice = "Choose a folder of your own (your home folder, say), or ask for access."
	default:
		e.What = sentence(e.Detail)
		e.Detail = ""
	}
	return e
}

// tracingKinds says what files a tracing may come from.
const tracingKinds = "Choose a picture of an ECG (PNG, JPEG, TIFF, PDF), a record file (WFDB .hea, CSV, EDF+) or a JSON written by tracelift with its CSV beside it."

// packagePrefix matches the program's package names at the start of an
// error's parts ("calib: ", "digitize: ").
var packagePrefix = regexp.MustCompile(`(^|: )(calib|digitize|pipeline|engine|model|record|wfdb|edf|csvio|atomic|report|axis|batch|compare): `)

// Plain is err's text without package names and without the parts it
// repeats (a wrapped error's own text said again at the end).
func Plain(err error) string {
	s := err.Error()
	for {
		t := packagePrefix.ReplaceAllString(s, "$1")
		if t == s {
			break
		}
		s = t
	}
	var parts []string
	seen := map[string]bool{}
	for _, p := range strings.Split(s, ": ") {
		k := strings.ToLower(strings.TrimSpace(p))
		if k == "" || seen[k] {
			continue
		}
		seen[k] = true
		seen[strings.ToLower(filepath.Base(k))] = true // a path, then its base name again
		parts = append(parts, strings.TrimSpace(p))
	}
	// The sentinel's words at the end repeat what the headline says.
	for _, sent := range []error{calib.ErrFormat, calib.ErrTooBig, calib.ErrNotECG, calib.ErrNoScale, digitize.ErrLayout, digitize.ErrNoTrace} {
		if len(parts) > 1 && errors.Is(err, sent) {
			last := strings.ToLower(parts[len(parts)-1])
			if strings.HasPrefix(strings.ToLower(packagePrefix.ReplaceAllString(sent.Error(), "$1")), last) {
				parts = parts[:len(parts)-1]
			}
		}
	}
	return sentence(strings.Join(parts, ": "))
}

func sentence(s string) string {
	s = strings.TrimSpace(s)
	if s == "" {
		return s
	}
	s = strings.ToUpper(s[:1]) + s[1:]
	if !strings.HasSuffix(s, ".") && !strings.HasSuffix(s, "?") && !strings.HasSuffix(s, ")") {
		s += "."
	}
	return s
}
