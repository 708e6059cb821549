// Package chart draws lockstep's investigation charts with gonum.org/v1/plot,
// as PNG or SVG: the timeline of a replay (group means with their
// confidence intervals and the grand mean, over p on a log scale with the
// significance line and the spans an alert was raised), and the box plots
// of one window with the analysis-of-means decision limits.
//
// The core types are Timeline (fed point by point, thinned to a bounded
// number of points, so its memory does not grow with the replay) and
// Boxes. Both write with WriteTo(w, format).
//
// Caveats: groups are told apart by marker shape and line dash as well as
// by colour, so that the charts read when printed in grey; with more
// groups than styles the styles repeat. The log scale of p has a floor
// (MinP): smaller p-values are drawn on it, and the axis label says so.
package chart
