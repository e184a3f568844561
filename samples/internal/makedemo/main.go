// Command makedemo writes the demo printouts and their truth into
// samples/demo. Run from the module root: go run ./samples/internal/makedemo
package main

import (
	"fmt"
	"os"
	"path/filepath"

	"tracelift/samples"
)

func main() {
	dir := "samples/demo"
	if len(os.Args) > 1 {
		dir = os.Args[1]
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		fmt.Fprintln(os.Stderr, "makedemo:", err)
		os.Exit(1)
	}
	for _, name := range samples.DemoNames() {
		img, c, j, err := samples.BuildDemo(name)
		if err != nil {
			fmt.Fprintln(os.Stderr, "makedemo:", err)
			os.Exit(1)
		}
		stem := name[:len(name)-len(filepath.Ext(name))]
		for _, f := range []struct {
			n string
			b []byte
		}{{name, img}, {stem + ".csv", c}, {stem + ".json", j}} {
			if err := os.WriteFile(filepath.Join(dir, f.n), f.b, 0o644); err != nil {
				fmt.Fprintln(os.Stderr, "makedemo:", err)
				os.Exit(1)
			}
		}
		fmt.Printf("%-40s %8d bytes image, %8d bytes csv\n", name, len(img), len(c))
	}
}
