package batch

import (
	"fmt"
	"path"
	"strings"
)

// Name is the input as the log and the summary name it: its relative
// path, and for a page of a document "#p" and the page number
// ("fax.tif#p2").
func (in Input) Name() string {
	if in.Page > 0 {
		return fmt.Sprintf("%s#p%d", in.Rel, in.Page)
	}
	return in.Rel
}

// DocumentOf returns the file a log or summary name belongs to: name
// without its "#pN" page suffix (see Input.Name).
func DocumentOf(name string) string {
	i := strings.LastIndex(name, "#p")
	if i < 0 || i+2 == len(name) {
		return name
	}
	for _, r := range name[i+2:] {
		if r < '0' || r > '9' {
			return name
		}
	}
	return name[:i]
}

// ExpandPages replaces each document of several pages (a multi-page TIFF,
// a PDF) by one input per page, so that every ECG page becomes its own
// record: page 1 keeps the document's stem, page N is "<stem>-pN" (made
// unique in its folder by "_2", "_3" … should another input hold that
// stem). pages tells how many pages a file holds (1 for a single picture
// or when unknown; it is called only for .tif, .tiff and .pdf files). The
// pages of a document share its Rel and so its shard.
func ExpandPages(ins []Input, pages func(path string) int) []Input {
	used := map[string]bool{}
	key := func(rel, stem string) string { return strings.ToLower(path.Dir(rel) + "/" + stem) }
	for _, in := range ins {
		used[key(in.Rel, stemOf(in))] = true
	}
	var out []Input
	for _, in := range ins {
		n := 1
		if in.Err == "" && in.Page == 0 && isDocument(in.Rel) {
			n = pages(in.Path)
		}
		if n <= 1 {
			out = append(out, in)
			continue
		}
		base := stemOf(in)
		for p := 1; p <= n; p++ {
			pin := in
			pin.Page = p
			if p > 1 {
				s := fmt.Sprintf("%s-p%d", base, p)
				for k := 2; used[key(in.Rel, s)]; k++ {
					s = fmt.Sprintf("%s-p%d_%d", base, p, k)
				}
				used[key(in.Rel, s)] = true
				pin.Stem = s
			} else {
				pin.Stem = base
			}
			out = append(out, pin)
		}
	}
	return out
}

func stemOf(in Input) string {
	if in.Stem != "" {
		return in.Stem
	}
	return plainStem(in.Rel)
}

func isDocument(rel string) bool {
	switch strings.ToLower(path.Ext(rel)) {
	case ".tif", ".tiff", ".pdf":
		return true
	}
	return false
}
