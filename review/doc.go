// Package review measures how well the thermal dose of a treatment session
// covered its target: target and margin masks, coverage, holes, lethal dose
// outside the margin, dose-volume histograms, isolines and display planes.
//
// It takes plain values from package dosemap and returns plain Go values and
// image.Image; it never imports a GUI toolkit.
package review
