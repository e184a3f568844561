package ledger

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sync"
	"testing"
)

func write(t *testing.T, p, s string) {
	t.Helper()
	if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestClaim(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(t.TempDir(), "scan.png")
	write(t, in, "image")
	src := FileSource(in, 0)

	// New names are claimed and recorded.
	if err := Claim(dir, src, []string{"scan.csv", "scan.json"}, []string{in}); err != nil {
		t.Fatal(err)
	}
	write(t, filepath.Join(dir, "scan.csv"), "old")
	write(t, filepath.Join(dir, "scan.json"), "old")
	// The same page's newer output may replace them.
	if err := Claim(dir, src, []string{"scan.csv", "scan.json"}, []string{in}); err != nil {
		t.Errorf("same source again: %v", err)
	}
	// Another source may not.
	other := FileSource(filepath.Join(t.TempDir(), "scan.png"), 0)
	if err := Claim(dir, other, []string{"scan.csv"}, nil); !errors.Is(err, ErrOtherSource) {
		t.Errorf("another source: %v, want ErrOtherSource", err)
	}
	// Another page of the same file may not either.
	if err := Claim(dir, FileSource(in, 2), []string{"scan.csv"}, nil); !errors.Is(err, ErrOtherSource) {
		t.Errorf("another page: %v, want ErrOtherSource", err)
	}
	// A file nobody recorded is never replaced.
	write(t, filepath.Join(dir, "100.dat"), "user's signal")
	err := Claim(dir, src, []string{"100.hea", "100.dat"}, nil)
	if !errors.Is(err, ErrNotOurs) {
		t.Errorf("a user's file: %v, want ErrNotOurs", err)
	}
	var ce *ConflictError
	if !errors.As(err, &ce) || ce.Path != filepath.Join(dir, "100.dat") {
		t.Errorf("the conflict does not name the file: %v", err)
	}
	// Nothing of a refused claim is recorded.
	if _, ok := Owner(dir, "100.hea"); ok {
		t.Error("a refused claim recorded 100.hea")
	}
}

func TestClaimRefusesInputs(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "scan.pdf")
	write(t, in, "%PDF-1.4")
	src := FileSource(in, 0)
	// The input itself as a destination.
	if err := Claim(dir, src, []string{"scan.pdf"}, []string{in}); !errors.Is(err, ErrInput) {
		t.Errorf("the input itself: %v, want ErrInput", err)
	}
	// Even when a ledger once named that file as an output (a summary PDF
	// later digitized as an input).
	dir2 := t.TempDir()
	if err := Claim(dir2, src, []string{"scan.pdf"}, nil); err != nil {
		t.Fatal(err)
	}
	own := filepath.Join(dir2, "scan.pdf")
	write(t, own, "%PDF-1.4 ours")
	if err := Claim(dir2, src, []string{"scan.pdf"}, []string{own}); !errors.Is(err, ErrInput) {
		t.Errorf("our own output as the input: %v, want ErrInput", err)
	}
	// Through a symbolic link and a hard link.
	out := t.TempDir()
	if err := os.Symlink(in, filepath.Join(out, "a.pdf")); err != nil {
		t.Fatal(err)
	}
	if err := os.Link(in, filepath.Join(out, "b.pdf")); err != nil {
		t.Fatal(err)
	}
	for _, n := range []string{"a.pdf", "b.pdf"} {
		if err := Claim(out, src, []string{n}, []string{in}); !errors.Is(err, ErrInput) {
			t.Errorf("%s linked to the input: %v, want ErrInput", n, err)
		}
	}
	// The input named through a link of its own.
	lnk := filepath.Join(t.TempDir(), "via.pdf")
	if err := os.Symlink(in, lnk); err != nil {
		t.Fatal(err)
	}
	if err := Claim(dir, FileSource(lnk, 0), []string{"scan.pdf"}, []string{lnk}); !errors.Is(err, ErrInput) {
		t.Errorf("input through a link: %v, want ErrInput", err)
	}
	if FileSource(lnk, 0) != src {
		t.Errorf("a link and its target are different sources: %v, %v", FileSource(lnk, 0), src)
	}
}

func TestClaimBadNames(t *testing.T) {
	dir := t.TempDir()
	for _, n := range []string{"", Name, "../x.csv", "a/b.csv"} {
		if err := Claim(dir, Source{Path: "x"}, []string{n}, nil); err == nil {
			t.Errorf("name %q accepted", n)
		}
	}
}

// A line cut short by a crash is skipped; the lines around it count.
func TestTornLine(t *testing.T) {
	dir := t.TempDir()
	write(t, filepath.Join(dir, Name), `{"name":"a.csv","source":"/x/a.png"}`+"\n"+`{"name":"b.cs`+"\n"+`{"name":"c.csv","source":"/x/c.png"}`+"\n"+`{"name":"d.csv","sou`)
	if s, ok := Owner(dir, "a.csv"); !ok || s.Path != "/x/a.png" {
		t.Errorf("a.csv: %v %v", s, ok)
	}
	if s, ok := Owner(dir, "c.csv"); !ok || s.Path != "/x/c.png" {
		t.Errorf("c.csv: %v %v", s, ok)
	}
	if _, ok := Owner(dir, "d.csv"); ok {
		t.Error("the torn last line was read")
	}
}

// Several writers (the workers of a batch) claim in one folder at once;
// every claim is recorded whole.
func TestConcurrentClaims(t *testing.T) {
	dir := t.TempDir()
	var wg sync.WaitGroup
	for i := 0; i < 40; i++ {
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			n := fmt.Sprintf("p%d.json", i)
			if err := Claim(dir, Source{Path: fmt.Sprintf("/in/p%d.png", i)}, []string{n}, nil); err != nil {
				t.Error(err)
			}
		}(i)
	}
	wg.Wait()
	// A fresh reader (another process) sees all of them.
	mu.Lock()
	delete(books, dir)
	mu.Unlock()
	for i := 0; i < 40; i++ {
		if s, ok := Owner(dir, fmt.Sprintf("p%d.json", i)); !ok || s.Path != fmt.Sprintf("/in/p%d.png", i) {
			t.Errorf("p%d.json: %v %v", i, s, ok)
		}
	}
}
