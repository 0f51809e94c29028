// Package report lays out the one-page coverage report of a reviewed case
// and exports its metrics.
//
// The page (A4 portrait) is drawn once through a gonum/plot vg.Canvas, so
// the PNG (vgimg) and the PDF (pdfcanvas.go: a vg.Canvas on fpdf, text
// kept as text, fonts embedded) share one layout.
// Its content comes from a plain Input — facts, tables, image panels and
// texts — that FromResult fills from an analysis; nothing here reads a case
// folder or knows the GUI.
//
// Every file is written atomically (a temporary file in the target's folder,
// then a rename), and Write refuses any target inside the case folder
// the report was made from: the program never writes into what it reads.
package report
