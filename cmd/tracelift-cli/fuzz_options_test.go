package main

import (
	"flag"
	"io"
	"math"
	"strings"
	"testing"

	"tracelift/digitize"
)

// FuzzOptions: any words after "digitize" either fail as a usage error or
// give options every stage accepts: finite, in their ranges, a known
// layout and order. Never a panic. The command is parsed here, not run.
func FuzzOptions(f *testing.F) {
	for _, s := range []string{
		"a.png -o out",
		"a.png -o out --dpi -300",
		"a.png -o out --dpi NaN --gain Inf",
		"a.png -o out --layout bogus --order x",
		"--page 0 a.png -o out",
		"a.png -o out --rate 1e308 --max-megapixels 1e-300",
		"a.png -o out --format csv,,pdf,ALL -- --dpi 3",
		"-o -o -o",
		"a.png -o out --px-per-mm 0.5e-320 --speed 25 --paper LETTER",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, line string) {
		fs := flag.NewFlagSet("digitize", flag.ContinueOnError)
		fs.SetOutput(io.Discard)
		var c commonFlags
		c.register(fs)
		if _, err := parseArgs(fs, strings.Fields(line), io.Discard); err != nil {
			return
		}
		if c.check() != nil {
			return
		}
		o := c.options()
		for name, v := range map[string]float64{"dpi": o.Calib.UserDPI, "px/mm": o.Calib.UserPxPerMM,
			"gain": o.Calib.StatedGainMMPerMV, "speed": o.Calib.StatedSpeedMMPerS, "rate": o.Digitize.RateHz} {
			if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
				t.Errorf("%q: %s = %v accepted", line, name, v)
			}
		}
		if o.Load.Page < 0 || o.Load.MaxPixels <= 0 || o.Load.MaxBytes <= 0 {
			t.Errorf("%q: load options %+v accepted", line, o.Load)
		}
		if err := digitize.CheckOptions(o.Digitize); err != nil {
			t.Errorf("%q: %v passed the check", line, err)
		}
	})
}
