package batch

import (
	"os"
	"path"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzInputList: any list file gives inputs or an error, never a panic;
// every input that is not refused lies inside the base folder, and its
// output folder, made by outDir, lies inside the output folder. Stems
// are unique per folder. The hostile lists found by hand are kept in
// testdata/fuzz/FuzzInputList.
func FuzzInputList(f *testing.F) {
	for _, s := range []string{
		"a.png\nb/c.png\n# note\n\n",
		"../../etc/passwd\n/etc/shadow\n",
		"a.png\nA.PNG\na.jpg\na.png\n",
		"sub/../../x.png\n./././a.png\n",
		"ward 1/scan (copy).pdf\r\nward 1/scan (copy).PDF\r\n",
		"\x00\n\t\n" + strings.Repeat("x/", 200) + "y.png\n",
		"con:/a.png\nb\\..\\c.png\n",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, list string) {
		base, out := t.TempDir(), t.TempDir()
		lp := filepath.Join(t.TempDir(), "list.txt")
		if err := os.WriteFile(lp, []byte(list), 0o644); err != nil {
			t.Fatal(err)
		}
		ins, err := Collect(lp, CollectOptions{Base: base, PlainStems: true, Out: out})
		if err != nil {
			return
		}
		seen := map[string]bool{}
		for _, in := range ins {
			if in.Err != "" {
				continue
			}
			if !within(base, filepath.Clean(in.Path)) {
				t.Errorf("%q reads outside the base folder: %s", list, in.Path)
			}
			k := strings.ToLower(path.Dir(in.Rel) + "/" + in.Stem)
			if seen[k] {
				t.Errorf("stem %s twice in %s", in.Stem, path.Dir(in.Rel))
			}
			seen[k] = true
			if strings.ContainsAny(in.Stem, "/\\") || in.Stem == "" {
				t.Errorf("bad stem %q for %q", in.Stem, in.Rel)
			}
			if dir, err := outDir(out, in.Rel); err == nil && !within(out, dir) {
				t.Errorf("%q writes outside the output folder: %s", in.Rel, dir)
			}
		}
	})
}
