// Package view turns dosecover's volumes into pictures of a plane: it
// samples any dosemap.Volume on a 2-D plane in patient space (the
// acquisition plane or a reformat), traces isolines with marching squares,
// and composites anatomy, the thermal-dose colourwash, the lethal isoline,
// target, margin and avoid contours and the hole, spill and not-monitored
// highlights into an *image.RGBA with orientation letters and a scale bar.
// The review window and the one-page report both draw with it.
//
// Coordinates: patient positions are millimetres in DICOM LPS (PS3.3
// C.7.6.2.1.1). A Plane has its own pixel grid (x to the right along U, y
// downwards along V); a View maps display pixels onto plane pixels for
// zooming and panning.
//
// The package takes plain inputs (volumes, masks, structures) and returns
// plain values and images; it never imports a GUI toolkit.
package view
