package batch

import (
	"bufio"
	"errors"
	"fmt"
	"hash/fnv"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"unicode"

	"tracelift/record/ledger"
)

// Input is one file to digitize.
type Input struct {
	Path string // where to read it (as given or found)
	Rel  string // slash-separated path relative to the input folder or list base
	Stem string // output file name without extension (unique within Rel's folder)
	// Page is the page of a document of several pages (from 1; see
	// ExpandPages); 0 for a file taken whole.
	Page int
	// Err is set when the input was refused while collecting (a ".." path, a
	// path outside the list's base folder); Run reports it as a failed file.
	Err string
}

// Extensions are the image file name extensions a folder walk picks up
// (lower case, with the dot). List files may name any file.
var Extensions = []string{".png", ".jpg", ".jpeg", ".tif", ".tiff", ".pdf"}

// CollectOptions steer Collect.
type CollectOptions struct {
	// Base is the folder list entries are relative to, and that absolute
	// entries must lie in. Empty: the list file's folder. Ignored for a
	// folder walk.
	Base string
	// Skip lists folders the walk never enters (the output folder when it
	// lies inside the input folder).
	Skip []string
	// PlainStems limits output stems to letters, digits, '_', '-' and '.'
	// (others become '_'), as WFDB record names must be.
	PlainStems bool
	// Out is the batch's output folder, when known: an input whose outputs
	// are already there under its plain stem (the folder's ledger says so)
	// keeps that stem when a new file of the same name appears beside it,
	// so a finished page is neither redone under a new name nor orphaned.
	Out string
}

// Collect returns the inputs named by src: every image file below a folder
// (hidden files and folders skipped, symbolic links to folders not
// followed), or the lines of a list file (one path per line; blank lines
// and lines starting with # ignored). The result is sorted by Rel and has a
// unique Stem per output folder. An error means src itself cannot be used.
func Collect(src string, opt CollectOptions) ([]Input, error) {
	fi, err := os.Stat(src)
	if err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	var ins []Input
	if fi.IsDir() {
		ins, err = walk(src, opt.Skip)
	} else {
		ins, err = readList(src, opt.Base)
	}
	if err != nil {
		return nil, err
	}
	sort.Slice(ins, func(a, b int) bool { return ins[a].Rel < ins[b].Rel })
	assignStems(ins, opt.PlainStems, ownerCheck(opt.Out))
	return ins, nil
}

func walk(root string, skip []string) ([]Input, error) {
	skipReal := map[string]bool{}
	for _, s := range skip {
		if r, err := filepath.EvalSymlinks(s); err == nil {
			if r, err = filepath.Abs(r); err == nil {
				skipReal[r] = true
			}
		}
	}
	var ins []Input
	err := filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			// An unreadable folder inside the tree is reported as a failed
			// input rather than ending the walk.
			rel, _ := filepath.Rel(root, p)
			ins = append(ins, Input{Path: p, Rel: filepath.ToSlash(rel), Err: "batch: cannot read " + p + ": " + errText(err) + "; check its permissions"})
			if d != nil && d.IsDir() {
				return fs.SkipDir
			}
			return nil
		}
		name := d.Name()
		if p != root && strings.HasPrefix(name, ".") {
			if d.IsDir() {
				return fs.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			if len(skipReal) > 0 && p != root {
				if r, err := filepath.EvalSymlinks(p); err == nil {
					if r, err = filepath.Abs(r); err == nil && skipReal[r] {
						return fs.SkipDir
					}
				}
			}
			return nil
		}
		if !hasImageExt(name) {
			return nil
		}
		rel, err := filepath.Rel(root, p)
		if err != nil {
			return nil
		}
		notRegular := func(what string) error {
			// Named like an image but no file to read (a FIFO, a device, a
			// link to one): reported, not skipped without a word.
			ins = append(ins, Input{Path: p, Rel: filepath.ToSlash(rel), Err: "batch: " + p + " is " + what + ", not an image file saved on disk; remove it or replace it with the file"})
			return nil
		}
		if d.Type()&fs.ModeSymlink != 0 {
			// A link to a file is followed; a link to a folder is not walked.
			fi, err := os.Stat(p)
			switch {
			case err != nil:
				return notRegular("a broken link")
			case fi.IsDir():
				return nil
			case !fi.Mode().IsRegular():
				return notRegular("a link to a " + fi.Mode().Type().String() + " file")
			}
		} else if !d.Type().IsRegular() {
			return notRegular("a special file (" + d.Type().String() + ")")
		}
		ins = append(ins, Input{Path: p, Rel: filepath.ToSlash(rel)})
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("batch: walking %s: %w", root, err)
	}
	return ins, nil
}

func hasImageExt(name string) bool {
	ext := strings.ToLower(filepath.Ext(name))
	for _, e := range Extensions {
		if e == ext {
			return true
		}
	}
	return false
}

func readList(list, base string) ([]Input, error) {
	f, err := os.Open(list)
	if err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	defer f.Close()
	if base == "" {
		base = filepath.Dir(list)
	}
	absBase, err := filepath.Abs(base)
	if err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	var ins []Input
	seen := map[string]bool{}
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 64<<10), 1<<20)
	line := 0
	for sc.Scan() {
		line++
		s := strings.TrimSpace(strings.TrimSuffix(sc.Text(), "\r"))
		if s == "" || strings.HasPrefix(s, "#") {
			continue
		}
		in := listEntry(s, absBase)
		if in.Err != "" {
			in.Err = fmt.Sprintf("%s (line %d of %s)", in.Err, line, list)
		}
		if seen[in.Rel] {
			continue // the same file listed twice is done once
		}
		seen[in.Rel] = true
		ins = append(ins, in)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("batch: reading %s: %w", list, err)
	}
	if line > 0 && len(ins) == 0 {
		return nil, fmt.Errorf("batch: %s names no files", list)
	}
	return ins, nil
}

// listEntry resolves one line of a list file against the base folder.
func listEntry(s, absBase string) Input {
	if filepath.IsAbs(s) {
		rel, err := filepath.Rel(absBase, filepath.Clean(s))
		if err != nil || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) {
			return Input{Path: s, Rel: s,
				Err: "batch: " + s + " lies outside the base folder " + absBase + "; list it relative to the base or give --base"}
		}
		return Input{Path: s, Rel: filepath.ToSlash(rel)}
	}
	for _, c := range strings.Split(filepath.ToSlash(s), "/") {
		if c == ".." {
			return Input{Path: s, Rel: s,
				Err: "batch: " + s + " contains \"..\"; list paths inside the base folder " + absBase}
		}
	}
	rel := path.Clean(filepath.ToSlash(s))
	return Input{Path: filepath.Join(absBase, filepath.FromSlash(rel)), Rel: rel}
}

// cleanComponent makes one path component safe to create: control
// characters and characters that other systems reject become "_".
func cleanComponent(c string) string {
	return strings.Map(func(r rune) rune {
		if unicode.IsControl(r) || strings.ContainsRune(`\:*?"<>|`, r) {
			return '_'
		}
		return r
	}, c)
}

// assignStems gives each input an output stem: its file name without
// extension, made unique within its folder (case-insensitively, for file
// systems that fold case) by adding the extension, then a counter. The
// inputs are sorted, so every shard computes the same stems.
//
// owns, when not nil, says whether the input at index i already has its
// outputs under stem; such an input keeps the stem within its group.
func assignStems(ins []Input, plain bool, owns func(in Input, stem string) bool) {
	key := func(dir, stem string) string { return strings.ToLower(dir + "/" + stem) }
	count := map[string]int{}
	clean := func(s string) string {
		if plain {
			s = strings.Map(func(r rune) rune {
				if r == '_' || r == '-' || r == '.' || r >= '0' && r <= '9' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' {
					return r
				}
				return '_'
			}, s)
		}
		return s
	}
	stemOf := func(rel string) string { return clean(plainStem(rel)) }
	for i := range ins {
		count[key(path.Dir(ins[i].Rel), stemOf(ins[i].Rel))]++
	}
	used := map[string]bool{}
	if owns != nil {
		for i := range ins {
			dir, stem := path.Dir(ins[i].Rel), stemOf(ins[i].Rel)
			if count[key(dir, stem)] > 1 && !used[key(dir, stem)] && owns(ins[i], stem) {
				used[key(dir, stem)] = true
				ins[i].Stem = stem
			}
		}
	}
	for i := range ins {
		if ins[i].Stem != "" {
			continue
		}
		dir := path.Dir(ins[i].Rel)
		stem := stemOf(ins[i].Rel)
		if count[key(dir, stem)] > 1 {
			// The extension joins the stem cleaned as the stem is (a
			// name ending in a dot and a backslash has a backslash for
			// its extension).
			if ext := strings.TrimPrefix(path.Ext(ins[i].Rel), "."); ext != "" {
				stem += "_" + clean(cleanComponent(strings.ToLower(ext)))
			}
		}
		s := stem
		for n := 2; used[key(dir, s)]; n++ {
			s = stem + "-" + strconv.Itoa(n)
		}
		used[key(dir, s)] = true
		ins[i].Stem = s
	}
}

func plainStem(rel string) string {
	b := path.Base(rel)
	s := strings.TrimSuffix(b, path.Ext(b))
	if s == "" {
		s = b
	}
	return cleanComponent(s)
}

// ShardOf returns the shard (1..n) that rel belongs to: FNV-1a (64 bit) of
// the slash-separated relative path, modulo n. It depends only on the path,
// so independent processes agree without talking to each other.
func ShardOf(rel string, n int) int {
	h := fnv.New64a()
	h.Write([]byte(rel))
	return int(h.Sum64()%uint64(n)) + 1
}

// Shard keeps the inputs of shard k of n (1-based).
func Shard(ins []Input, k, n int) []Input {
	if n <= 1 {
		return ins
	}
	var out []Input
	for _, in := range ins {
		if ShardOf(in.Rel, n) == k {
			out = append(out, in)
		}
	}
	return out
}

// ParseShard reads "K/N" (1 ≤ K ≤ N).
func ParseShard(s string) (k, n int, err error) {
	a, b, ok := strings.Cut(s, "/")
	if ok {
		k, err = strconv.Atoi(strings.TrimSpace(a))
		if err == nil {
			n, err = strconv.Atoi(strings.TrimSpace(b))
		}
	}
	if !ok || err != nil || n < 1 || k < 1 || k > n {
		return 0, 0, errors.New("batch: --shard takes K/N with 1 ≤ K ≤ N, e.g. 2/8")
	}
	if n > MaxShards {
		return 0, 0, fmt.Errorf("batch: --shard %s: at most %d shards", s, MaxShards)
	}
	return k, n, nil
}

func errText(err error) string {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err.Error()
	}
	return err.Error()
}

// ownerCheck returns the owns function of assignStems for the output
// folder out ("" = none): the folder mirroring the input's holds
// <stem>.json written for that input's file.
func ownerCheck(out string) func(in Input, stem string) bool {
	if out == "" {
		return nil
	}
	return func(in Input, stem string) bool {
		if in.Err != "" {
			return false
		}
		dir := out
		for _, c := range strings.Split(path.Dir(in.Rel), "/") {
			if c != "." && c != "" {
				dir = filepath.Join(dir, cleanComponent(c))
			}
		}
		src, ok := ledger.Owner(dir, stem+".json")
		return ok && src.Path == ledger.RealPath(in.Path)
	}
}
