// Package review measures how well the thermal dose of a treatment session
// covered its target: target and margin masks, coverage, holes, lethal dose
// outside the margin, dose-volume histograms and per-sonication figures.
// Display planes, isolines, rendering and the overlay palette live in
// review/view.
//
// Settings (settings.go) are the one home of an analysis' choices: their
// defaults, limits, JSON (the "settings" of a Result and of --settings
// files), hash and description. LoadAndAnalyze is the one path from a case
// folder to a Result that the commands and the audit share; HashInputs is
// the one hash of a case's files. Session.Probe and
// Session.PeakTemperature give the temperature history of a point and the
// peak temperature map the review window shows.
//
// Prepare computes the thermometry and dose of every sonication of a
// dosemap.Case once and rasterizes its structures onto the analysis grid
// (the thermometry grid with slices of at most MaxAnalysisStep mm; see
// Occupancy for the slab model of planar contours); Session.Analyze then
// measures a Result for any threshold, margin or set of excluded
// sonications quickly. Result.WriteJSON writes the result file documented
// in the README (SchemaVersion), Result.WriteText a readable summary.
//
// The figures are facts about the dose maps and the thresholds chosen; the
// package gives no advice. It takes plain values from package dosemap and
// returns plain Go values; it reads case folders only through
// dosemap/dicomio and never imports a GUI toolkit.
package review
