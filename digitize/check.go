package digitize

import (
	"fmt"

	"tracelift/record"
)

// CheckOptions reports an option Run would refuse, so that a caller can
// refuse it before any image is read (the command line's usage errors).
func CheckOptions(o Options) error {
	if o.Layout != "" {
		if !record.Layout(o.Layout).Known() {
			return fmt.Errorf("digitize: unknown layout %q (choose from %s)", o.Layout, record.LayoutNames(record.Layouts))
		}
	}
	switch o.LeadOrder {
	case "", "standard", "cabrera":
	default:
		return fmt.Errorf("digitize: unknown lead order %q (choose standard or cabrera)", o.LeadOrder)
	}
	return nil
}
