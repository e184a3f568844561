// Package batch digitizes many printouts in one run: it collects the inputs
// (a folder tree or a list file), splits them into shards that independent
// processes can share, runs the pages on parallel workers, keeps a log with
// one JSON line per file, writes a summary CSV, and resumes a run by
// skipping the files whose outputs are already there and match the input.
//
// The package does not know how a page is digitized: the caller hands Run a
// ProcessFunc (the command-line tool's runs the pipeline, in a child
// process by default). That keeps this package free of OpenCV and lets its
// tests use a fake.
//
// Paths: Input.Rel is the input's path relative to the input folder (or the
// list's base folder), slash-separated. Outputs mirror it below the output
// folder: OUT/<dir of Rel>/<Stem>.<ext>. Nothing is ever written outside
// OUT: relative paths with "..", absolute list entries outside the base
// folder and symbolic links inside OUT are refused.
//
// Outputs of a page appear all at once or not at all from the point of view
// of resume: the ProcessFunc writes into a private scratch folder inside
// OUT, and Run moves the files into place with rename(2), the JSON document
// last. A file whose JSON is missing, unreadable or for other image bytes is
// processed again.
package batch
