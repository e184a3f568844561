package batch

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestCollectWalk(t *testing.T) {
	t.Parallel()
	src := t.TempDir()
	writeTree(t, src, map[string]string{
		"a.png": "", "a.JPG": "", "b/c.tiff": "", "b/d/e.pdf": "", "notes.txt": "",
		".hidden/x.png": "", "b/.y.png": "", "out/old.png": "",
	})
	other := t.TempDir()
	writeTree(t, other, map[string]string{"z.png": ""})
	if err := os.Symlink(other, filepath.Join(src, "linkdir")); err != nil {
		t.Fatal(err)
	}
	ins, err := Collect(src, CollectOptions{Skip: []string{filepath.Join(src, "out")}})
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, in := range ins {
		got = append(got, in.Rel+"→"+in.Stem)
		if in.Err != "" {
			t.Errorf("%s: unexpected refusal %s", in.Rel, in.Err)
		}
	}
	// a.JPG and a.png share a stem, so both carry their extension.
	want := []string{"a.JPG→a_jpg", "a.png→a_png", "b/c.tiff→c", "b/d/e.pdf→e"}
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("walk found %v, want %v", got, want)
	}
	// WFDB record names allow letters, digits, _ - . only (wfdb.WriteRecord,
	// after the WFDB header format); two names that meet after the change
	// are told apart (extension first, then a counter).
	writeTree(t, src, map[string]string{"scan 1 (ward).png": "", "scan_1__ward_.png": "", "Bäcker.png": ""})
	ins, err = Collect(src, CollectOptions{PlainStems: true, Skip: []string{filepath.Join(src, "out")}})
	if err != nil {
		t.Fatal(err)
	}
	stems := map[string]string{}
	for _, in := range ins {
		stems[in.Rel] = in.Stem
	}
	if stems["scan 1 (ward).png"] != "scan_1__ward__png" || stems["scan_1__ward_.png"] != "scan_1__ward__png-2" || stems["Bäcker.png"] != "B_cker" {
		t.Errorf("plain stems %v", stems)
	}
}

func TestCollectList(t *testing.T) {
	t.Parallel()
	base := t.TempDir()
	writeTree(t, base, map[string]string{"p/1.png": "", "p/2.png": ""})
	list := filepath.Join(base, "list.txt")
	body := strings.Join([]string{
		"# pages of the archive", "", "p/1.png", filepath.Join(base, "p", "2.png"), "p/1.png",
		"../escape.png", "p/../../x.png", "/etc/passwd", "missing.png",
	}, "\n")
	if err := os.WriteFile(list, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	ins, err := Collect(list, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	refused := map[string]string{}
	var ok []string
	for _, in := range ins {
		if in.Err != "" {
			refused[in.Rel] = in.Err
		} else {
			ok = append(ok, in.Rel)
		}
	}
	if strings.Join(ok, ",") != "missing.png,p/1.png,p/2.png" {
		t.Errorf("accepted %v", ok)
	}
	for _, r := range []string{"../escape.png", "p/../../x.png", "/etc/passwd"} {
		msg, ok := refused[r]
		if !ok {
			t.Errorf("%s was not refused", r)
			continue
		}
		if !strings.HasPrefix(msg, "batch: ") || !strings.Contains(msg, r) || !strings.Contains(msg, "line ") {
			t.Errorf("refusal of %s does not name it, its line and the package: %q", r, msg)
		}
	}
	if _, err := Collect(filepath.Join(base, "nope"), CollectOptions{}); err == nil {
		t.Error("a missing input gave no error")
	}
}

func TestShard(t *testing.T) {
	t.Parallel()
	// FNV-1a 64-bit test vectors: offset basis for "" and the value for
	// "a" (the FNV reference test suite, draft-eastlake-fnv; from memory).
	// Checking them pins the hash so shards can be computed elsewhere.
	if got := ShardOf("", 1<<62); uint64(got-1) != 0xcbf29ce484222325%(1<<62) {
		t.Errorf("FNV-1a of \"\" mod 2^62 = %#x", got-1)
	}
	if got := ShardOf("a", 1<<62); uint64(got-1) != 0xaf63dc4c8601ec8c%(1<<62) {
		t.Errorf("FNV-1a of \"a\" mod 2^62 = %#x", got-1)
	}
	var ins []Input
	for i := 0; i < 3000; i++ {
		ins = append(ins, Input{Rel: fmt.Sprintf("box%02d/page%04d.png", i%17, i)})
	}
	const n = 3
	seen := map[string]int{}
	for k := 1; k <= n; k++ {
		part := Shard(ins, k, n)
		// Each shard gets a fair part: 1000 expected, binomial sd ≈ 26.
		if len(part) < 850 || len(part) > 1150 {
			t.Errorf("shard %d/%d holds %d of 3000", k, n, len(part))
		}
		for _, in := range part {
			seen[in.Rel]++
		}
	}
	for _, in := range ins {
		if seen[in.Rel] != 1 {
			t.Fatalf("%s is in %d shards", in.Rel, seen[in.Rel])
		}
	}
	for _, bad := range []string{"", "3", "0/3", "4/3", "a/b", "1/0", "-1/2"} {
		if _, _, err := ParseShard(bad); err == nil {
			t.Errorf("ParseShard(%q) accepted", bad)
		}
	}
	if k, n, err := ParseShard(" 2 / 8 "); err != nil || k != 2 || n != 8 {
		t.Errorf("ParseShard(2/8) = %d, %d, %v", k, n, err)
	}
}
