package batch

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// pagedFake reads "pages=N covers=a,b" on the first line of a document
// (a stand-in for a TIFF or PDF); cover pages are reported as holding no
// ECG, the others digitized by fake.
type pagedFake struct{ fake }

func (f *pagedFake) pages(path string) int {
	var n int
	b, _ := os.ReadFile(path)
	fmt.Sscanf(string(b), "pages=%d", &n)
	return max(1, n)
}

func (f *pagedFake) process(ctx context.Context, in string, page int, dir, stem string) (FileResult, error) {
	b, _ := os.ReadFile(in)
	first, _, _ := strings.Cut(string(b), "\n")
	if _, covers, ok := strings.Cut(first, "covers="); ok {
		for _, c := range strings.Split(covers, ",") {
			if c == fmt.Sprint(page) {
				return FileResult{NoECG: fmt.Sprintf("page %d: a page of text", page)}, nil
			}
		}
	}
	fr, err := f.fake.process(ctx, in, page, dir, stem)
	fr.Page = page
	return fr, err
}

func TestExpandPagesStems(t *testing.T) {
	dir := t.TempDir()
	writeTree(t, dir, map[string]string{
		"fax.tif":     "pages=3\nhr=60\n",
		"fax-p2.png":  "", // an input already named like page 2's record
		"one.pdf":     "pages=1\nhr=60\n",
		"sub/doc.pdf": "pages=2\nhr=60\n",
	})
	ins, err := Collect(dir, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var f pagedFake
	got := map[string]string{}
	for _, in := range ExpandPages(ins, f.pages) {
		got[in.Name()] = in.Stem
	}
	want := map[string]string{
		"fax.tif#p1": "fax", "fax.tif#p2": "fax-p2_2", "fax.tif#p3": "fax-p3",
		"fax-p2.png": "fax-p2", "one.pdf": "one", "sub/doc.pdf#p1": "doc", "sub/doc.pdf#p2": "doc-p2",
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("stems %v, want %v", got, want)
	}
}

// Each ECG page of a document is its own record, cover pages are passed
// over (not failed), a second run finds the pages up to date, the shards
// split documents whole, and a document of cover sheets only fails.
func TestDocumentPagesInBatch(t *testing.T) {
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{
		"fax.tif":    "pages=3 covers=1,3\nhr=60\n",
		"scan.pdf":   "pages=2 covers=1\nhr=72\n",
		"covers.tif": "pages=2 covers=1,2\nhr=60\n",
		"photo.png":  "hr=80\n",
	})
	all, err := Collect(src, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var f pagedFake
	ins := ExpandPages(all, f.pages)
	rep, err := Run(context.Background(), ins, f.process, Options{Out: out, Jobs: 2, Expect: []string{"csv"}})
	if err != nil {
		t.Fatal(err)
	}
	if rep.OK != 3 || rep.NoECG != 4 || rep.Failed != 1 {
		t.Errorf("ok %d, no ECG %d, failed %d; want 3, 4, 1 (fax 2 covers, scan 1, covers.tif 2 of which its first page fails the document)", rep.OK, rep.NoECG, rep.Failed)
	}
	for _, name := range []string{"fax-p2.csv", "fax-p2.json", "scan-p2.json", "photo.json"} {
		if _, err := os.Stat(filepath.Join(out, name)); err != nil {
			t.Errorf("%s not written: %v", name, err)
		}
	}
	for _, name := range []string{"fax.json", "fax-p3.json", "scan.json", "covers.json"} {
		if _, err := os.Stat(filepath.Join(out, name)); err == nil {
			t.Errorf("%s written for a cover page", name)
		}
	}
	rows := readSummaryFile(t, rep.SummaryPath)
	status := map[string]Status{}
	for _, r := range rows {
		status[r.File] = r.Status
	}
	if status["fax.tif#p1"] != StatusNoECG || status["fax.tif#p2"] != StatusOK || status["covers.tif#p1"] != StatusFailed {
		t.Errorf("summary statuses %v", status)
	}
	// Resumed: the ECG pages are up to date, the cover pages looked at again.
	rep2, err := Run(context.Background(), ins, f.process, Options{Out: out, Jobs: 2, Expect: []string{"csv"}})
	if err != nil {
		t.Fatal(err)
	}
	if rep2.Skipped != 3 || rep2.OK != 0 {
		t.Errorf("second run: %d up to date, %d digitized; want 3, 0", rep2.Skipped, rep2.OK)
	}
	// Shards: every page lands in exactly one, a document's pages together.
	seen := map[string]int{}
	for k := 1; k <= 3; k++ {
		for _, in := range ExpandPages(Shard(all, k, 3), f.pages) {
			seen[in.Name()] += k * 10
			seen[in.Name()+"#count"]++
		}
	}
	for _, in := range ins {
		if seen[in.Name()+"#count"] != 1 {
			t.Errorf("%s in %d shards, want 1", in.Name(), seen[in.Name()+"#count"])
		}
	}
	if seen["fax.tif#p1"] != seen["fax.tif#p2"] || seen["fax.tif#p2"] != seen["fax.tif#p3"] {
		t.Errorf("the pages of fax.tif went to different shards")
	}
}

// Merging with --inputs counts a document as done when its pages have
// rows.
func TestMergeKnowsPages(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "summary.csv")
	if err := WriteSummaryFile(p, []Row{{File: "fax.tif#p1", Status: StatusNoECG, Findings: NoFindings()}, {File: "fax.tif#p2", Status: StatusOK, Findings: NoFindings()}}); err != nil {
		t.Fatal(err)
	}
	rep, err := Merge([]string{p}, []string{"fax.tif", "other.png"})
	if err != nil {
		t.Fatal(err)
	}
	if fmt.Sprint(rep.MissingFiles) != "[other.png]" {
		t.Errorf("missing %v, want [other.png]", rep.MissingFiles)
	}
	for name, want := range map[string]string{"fax.tif#p12": "fax.tif", "a#p.png": "a#p.png", "b.tif": "b.tif", "c#p": "c#p"} {
		if got := DocumentOf(name); got != want {
			t.Errorf("DocumentOf(%q) = %q, want %q", name, got, want)
		}
	}
}
