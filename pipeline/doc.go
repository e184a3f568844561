// Package pipeline chains the stages of tracelift for the command-line
// tool, the batch runner and the desktop app: load the image, find the
// paper and its scale (calib), trace the leads (digitize), measure them
// (axis) and write the exports.
package pipeline
