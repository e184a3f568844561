package digitize

import (
	"fmt"
	"sort"
	"strings"
)

// Layouts returns the layout names Options.Layout accepts, sorted.
func Layouts() []string {
	out := make([]string, 0, len(layoutRows))
	for l := range layoutRows {
		out = append(out, l)
	}
	sort.Strings(out)
	return out
}

// CheckOptions reports an option Run would refuse, so that a caller can
// refuse it before any image is read (the command line's usage errors).
func CheckOptions(o Options) error {
	if o.Layout != "" {
		if _, ok := layoutRows[o.Layout]; !ok {
			return fmt.Errorf("digitize: unknown layout %q (choose from %s)", o.Layout, strings.Join(Layouts(), ", "))
		}
	}
	switch o.LeadOrder {
	case "", "standard", "cabrera":
	default:
		return fmt.Errorf("digitize: unknown lead order %q (choose standard or cabrera)", o.LeadOrder)
	}
	return nil
}
