package model

import (
	"math"
	"testing"
)

// The tracing on screen, as a comparison takes it, is the corrected
// record with its findings and the per-lead confidence the measurement
// got (the fake reads PTB s0010_re, V1 at 0.4); an erase shows in it, and
// changing the map it returns leaves the model alone.
func TestCurrentFollowsCorrections(t *testing.T) {
	f := newFake(t)
	if _, ok := New(f).Current(); ok {
		t.Fatal("a model with nothing open has a current tracing")
	}
	m := open(t, f, "")
	cur, ok := m.Current()
	if !ok || cur.Record != m.Record() || cur.Summary != m.Summary() || !cur.Digitized || cur.Name != "test" {
		t.Fatalf("current %+v, ok %v", cur, ok)
	}
	if cur.Quality["V1"] != 0.4 || cur.Quality["II"] != 0.9 {
		t.Errorf("quality %v", cur.Quality)
	}
	cur.Quality["V1"] = 1
	if again, _ := m.Current(); again.Quality["V1"] != 0.4 {
		t.Error("the returned quality is the model's own map")
	}
	p := m.Panels()[1]
	if err := m.Erase(1, p.Box[0]+10, p.Box[0]+60); err != nil {
		t.Fatal(err)
	}
	after, _ := m.Current()
	if after.Record == cur.Record {
		t.Error("the current tracing does not follow the erase")
	}
}

// The overlaid beats share one amplitude window: whole half millivolts
// holding every sample with a quarter millivolt of room, at least ±1 mV,
// NaN ignored; the grid of boxes takes the columns that draw them largest.
func TestBeatSpanAndGrid(t *testing.T) {
	nan := math.NaN()
	lo, hi := BeatSpan([]BeatOverlay{{Earlier: []float64{0, 1.6, nan}, Current: []float64{-0.3, nan}}, {Earlier: []float64{-2.1}}})
	if lo != -2.5 || hi != 2 {
		t.Errorf("span %v..%v, want -2.5..2", lo, hi)
	}
	if lo, hi := BeatSpan(nil); lo != -1.5 || hi != 1.5 {
		t.Errorf("empty span %v..%v", lo, hi)
	}
	// 12 boxes of 22.5 × 30 mm with 2 mm gaps: in a wide area (6 × 24.5 =
	// 147 mm by 2 × 32 = 64 mm fits 1400 × 600 at 9.4 units/mm) six
	// columns; in a square one (4 × 24.5 = 98 by 3 × 32 = 96) four.
	if c, k := BeatGrid(12, 1400, 600, 22.5, 30, 2); c != 6 || math.Abs(k-600.0/64) > 1e-9 {
		t.Errorf("wide: %d columns at %v", c, k)
	}
	if c, _ := BeatGrid(12, 600, 600, 22.5, 30, 2); c != 4 {
		t.Errorf("square: %d columns", c)
	}
	if _, k := BeatGrid(0, 600, 600, 22.5, 30, 2); k != 0 {
		t.Errorf("no boxes drawn at %v", k)
	}
}
