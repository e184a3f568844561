package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// DEVELOPERS.md's package table says which packages may import gonum,
// gocv and imaging. A package whose row names a library must import it
// (the table says it does the work there); a package whose row neither
// names it nor allows everything must not. Imports are the packages' own,
// without their tests (go list).
func TestLibrariesAsDocumented(t *testing.T) {
	doc, err := os.ReadFile(filepath.Join("..", "..", "DEVELOPERS.md"))
	if err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command("go", "list", "-f", "{{.ImportPath}} {{join .Imports \" \"}}", "tracelift/...").Output()
	if err != nil {
		t.Skipf("go list unavailable: %v", err)
	}
	imports := map[string][]string{}
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		f := strings.Fields(line)
		imports[f[0]] = f[1:]
	}
	libs := map[string]string{
		"gonum":   "gonum.org/v1/gonum/",
		"gocv":    "gocv.io/x/gocv",
		"imaging": "github.com/disintegration/imaging",
	}
	uses := func(pkg, prefix string) bool {
		for _, p := range imports[pkg] {
			if strings.HasPrefix(p, prefix) {
				return true
			}
		}
		return false
	}
	name := regexp.MustCompile("`([a-z/.-]+)`")
	rows := 0
	for _, line := range strings.Split(string(doc), "\n") {
		cells := strings.Split(line, "|")
		if len(cells) != 5 || !strings.HasPrefix(strings.TrimSpace(cells[1]), "`") {
			continue
		}
		may := strings.TrimSpace(cells[3])
		free := strings.Contains(may, "everything") || strings.Contains(may, "all but")
		for _, m := range name.FindAllStringSubmatch(cells[1], -1) {
			pkg := "tracelift/" + m[1]
			if _, ok := imports[pkg]; !ok {
				t.Errorf("DEVELOPERS.md names %s, which go list does not know", m[1])
				continue
			}
			rows++
			for lib, prefix := range libs {
				named := regexp.MustCompile(`\b` + lib + `\b`).MatchString(may)
				switch got := uses(pkg, prefix); {
				case named && !got:
					t.Errorf("%s: DEVELOPERS.md says it imports %s; it does not", m[1], lib)
				case !named && !free && got:
					t.Errorf("%s imports %s; DEVELOPERS.md's table does not say so", m[1], lib)
				}
			}
		}
	}
	if rows < 10 {
		t.Fatalf("read only %d packages from DEVELOPERS.md's table", rows)
	}
}
