// Package wfdb reads and writes records in the WFDB format (PhysioNet's
// open format for physiological signals): a text header (.hea) naming
// one or more binary signal files, and MIT annotation files (.atr).
//
// Supported signal formats: 16 (little-endian 16-bit), 212 (two 12-bit
// samples packed in three bytes) and 80 (8-bit offset binary). Samples are
// converted to physical units as (adu − baseline)/gain; a sample equal to
// the format's invalid value (−32768 for 16, −2048 for 212, −128 for 80)
// becomes NaN.
package wfdb
