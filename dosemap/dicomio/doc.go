// Package dicomio reads a treatment case folder into a dosemap.Case and an
// Inventory of what the folder holds.
//
// The folder is searched to any depth; file names and extensions are
// ignored: every file is classified from standard DICOM attributes only.
// Nothing is ever written into the folder.
//
// # Classification of a series (one SeriesInstanceUID)
//
//   - Modality RTSTRUCT: structure set. ROIs from StructureSetROISequence,
//     roles from RTROIInterpretedType of RTROIObservationsSequence (PTV, CTV,
//     GTV: target; AVOIDANCE, ORGAN: avoid; anything else: other, listed
//     only). CLOSED_PLANAR contours become polygons; several on one plane
//     combine by the even-odd rule (a contour inside another cuts a hole);
//     POINT and other contour types are counted and ignored.
//   - Real World Value Mapping (0040,9096) with LUTLabel "CEM43": dose map
//     (CEM43 minutes = RWV slope × stored + intercept), one sonication.
//   - Real World Value Mapping with measurement units (UCUM CodeValue) "Cel":
//     temperature maps (absolute °C), one sonication.
//   - MR whose frames are phase (ImageType value 3 P or PHASE, FrameType in
//     enhanced images, or ComplexImageComponent PHASE) with several frames
//     per slice position over time: thermometry. Magnitude frames in the
//     same series go with them; a magnitude-only series with several time
//     points is paired with the phase series of the same grid and frame
//     times (first frames within 1 s). One phase series is one acquisition
//     and one sonication.
//   - Other MR or CT images: anatomy. With several, the one with the most
//     slices is used unless LoadOptions.AnatomySeries names another.
//   - Anything else is listed as "other".
//
// # Frames, slices and times
//
// The frames of a series are split into stacks (sets of parallel
// slices): by StackID (0020,9056) when every frame of an enhanced image
// carries one (InStackPositionNumber (0020,9057) is checked against the
// positions), else by ImageOrientationPatient; see splitStacks.
// Time points come from TemporalPositionIdentifier (0020,0100) or, in
// enhanced images, TemporalPositionIndex (0020,9128) when every frame has
// one; otherwise the frames at each slice position are ordered by time and
// the n-th frame of each slice makes time point n. Slices are ordered by
// ImagePositionPatient along the normal Row×Col; the slice spacing is the
// mean distance between positions (SliceThickness only for a single
// slice). Frame times are AcquisitionDateTime (FrameAcquisitionDateTime),
// else AcquisitionDate (or another date of the file) + AcquisitionTime,
// else ContentDate + ContentTime, taken as written (no time zone). Times
// without a date, or all on one date, that span more than 12 h with a gap
// of more than 12 h are taken to cross midnight. Sonications are numbered
// from 1 in order of their first frame.
//
// # Pixel values
//
// Stored values honour BitsAllocated, BitsStored, HighBit and
// PixelRepresentation (the DICOM library ignores the latter). Anatomy and
// magnitude are RescaleSlope × stored + RescaleIntercept. Phase in radians
// comes from an RWV mapping in "rad" when present, else the stored range
// maps linearly onto [-π, π): signed v·π/2^(BitsStored-1), unsigned
// (v - 2^(BitsStored-1))·π/2^(BitsStored-1); LoadOptions.PhaseScale
// overrides both. MagneticFieldStrength (T) and EchoTime (ms, stored in
// seconds) go into Sonication.B0 and TE; when missing they stay 0 and the
// Inventory says so.
//
// # Robustness
//
// A file that cannot be used is listed in Inventory.Skipped with the
// reason (not DICOM, truncated or corrupt, unsupported compression with
// the transfer syntax named, missing tag, colour image...). Before a file
// reaches the DICOM library its element lengths are checked against the
// file, so a corrupt length cannot make the library allocate gigabytes;
// panics inside the library are recovered per file. Compressed transfer
// syntaxes (JPEG, JPEG-LS, JPEG 2000, RLE, deflate) are not decoded.
//
// Plain image files (native pixel data, no functional groups) in Explicit
// or Implicit VR Little Endian with the DICM preamble have their
// attributes read directly from the file bytes, giving the values the
// DICOM library gives; every other file, and any such file with something
// unexpected in it, is read by the library.
//
// Scan reads attributes only (pixel data skipped); Load reads attributes,
// then the pixel data of the files used, in parallel (LoadOptions.Workers,
// default GOMAXPROCS), decoding stored values directly into the frames.
package dicomio
