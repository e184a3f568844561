// Package report draws the printable summary of a digitized ECG as a PDF
// (A4 or US Letter, both landscape).
//
// The work is split in three layers:
//
//   - Summary holds exactly what the page shows: header fields, the leads
//     as a record.Record (mV on the tracing clock), measurement rows already
//     formatted with their uncertainty, the frontal axes in degrees, flags,
//     quality figures, the caution, and optionally the source image with the
//     traced leads as polylines in source-image pixels.
//   - Render draws a Summary with fpdf. It knows nothing of the pipeline.
//   - FromOutcome fills a Summary from a pipeline.Outcome; Write chains the
//     two and is installed as the pipeline's PDF writer from init.
//
// Page coordinates are millimetres, x right and y down from the top-left
// corner of the page (fpdf's user space with unit "mm"). The signal grid is
// drawn at true scale: 1 mm minor and 5 mm major lines, 25 mm/s and
// 10 mm/mV (common practice), so a printed page can be measured with a
// ruler when it is printed without "fit to page" scaling.
//
// Hexaxial angles follow the trade's convention (common practice): 0° points
// to the patient's left (right on the page), positive angles turn
// clockwise on the page, so +90° (aVF) points down.
package report
