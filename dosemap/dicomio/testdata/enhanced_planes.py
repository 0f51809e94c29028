"""Writes Enhanced MR Image Storage objects with pydicom for the reader tests.

usage: python3 enhanced_planes.py OUT_DIR LAYOUT...  (writes OUT_DIR/LAYOUT.dcm)

One multi-frame file holds a fictitious phantom's thermometry: magnitude
and phase frames (MR Image Frame Type, FrameType value 3 MAGNITUDE or
PHASE) of 4 time points 3 s apart on two stacks, each frame placed by the
Plane Position and Plane Orientation functional groups and numbered in the
Frame Content functional group by StackID (0020,9056),
InStackPositionNumber (0020,9057) and TemporalPositionIndex (0020,9128),
with a Dimension Index of those three (PS3.3 C.7.6.16.2.2 Frame Content,
C.7.6.17 Multi-frame Dimension). 8 x 8 pixels of 2 mm, 16 bits unsigned.

Stored value of frame (stack s = 1 or 2, slice k from 0 in order of
InStackPositionNumber, time t from 0, pixel column i, row j):
    magnitude  2000 + 1000 s + 100 t + 10 k + i + j
    phase     32768 + 1000 s + 100 t + 10 k + i + j

LAYOUT:
  planes      stack "1" one coronal plane, stack "2" one sagittal plane,
              both through (0, 0, 0) mm
  slabs       stack "1" two axial slices at z = -20, -17 mm, stack "2" two
              axial slices at z = 10, 13 mm (parallel stacks of one series)
  mixed-id    as planes, but every frame carries StackID "1" (the StackID
              disagrees with the orientations)
  bad-order   as slabs, but the InStackPositionNumbers of stack "2" are 1
              at both slices
  no-id       as planes, without StackID and InStackPositionNumber
  some-id     as planes, but the frames of the last time point carry no
              StackID and no InStackPositionNumber
  id-per-time as slabs, but the StackID is the time point ("1" to "4"), so
              that every StackID holds the planes of every other
"""

import os
import sys

import numpy as np
import pydicom
from pydicom.dataset import Dataset, FileMetaDataset
from pydicom.sequence import Sequence
from pydicom.uid import ExplicitVRLittleEndian

ENHANCED_MR = "1.2.840.10008.5.1.4.1.1.4.1"
COLS = ROWS = 8
SPACING = 2.0
TIMES = 4

CORONAL = [1, 0, 0, 0, 0, -1]
SAGITTAL = [0, 1, 0, 0, 0, -1]
AXIAL = [1, 0, 0, 0, 1, 0]


def cross(a, b):
    return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]


def plane_origin(iop, centre):
    """Position of the first pixel of a plane whose centre is centre."""
    row, col = iop[:3], iop[3:]
    h = SPACING * (COLS - 1) / 2
    return [centre[a] - h * row[a] - h * col[a] for a in range(3)]


def stacks_of(layout):
    """[(StackID, iop, [centre of each slice])] in order of InStackPositionNumber."""
    if layout in ("planes", "mixed-id", "no-id", "some-id"):
        return [("1", CORONAL, [[0, 0, 0]]), ("2", SAGITTAL, [[0, 0, 0]])]
    if layout in ("slabs", "bad-order", "id-per-time"):
        return [("1", AXIAL, [[0, 0, -20], [0, 0, -17]]), ("2", AXIAL, [[0, 0, 10], [0, 0, 13]])]
    raise SystemExit("unknown layout " + layout)


def code(value, scheme, meaning):
    c = Dataset()
    c.CodeValue, c.CodingSchemeDesignator, c.CodeMeaning = value, scheme, meaning
    return c


def main():
    for layout in sys.argv[2:]:
        write(os.path.join(sys.argv[1], layout + ".dcm"), layout)


def write(out, layout):
    uid = "2.25.7731"  # fixed UIDs: the files are compared run to run
    ds = Dataset()
    ds.SpecificCharacterSet = "ISO_IR 100"
    ds.ImageType = ["ORIGINAL", "PRIMARY", "TEMPERATURE", "NONE"]
    ds.InstanceCreationDate, ds.InstanceCreationTime = "20260301", "100000"
    ds.SOPClassUID = ENHANCED_MR
    ds.SOPInstanceUID = uid + ".3.1"
    ds.StudyDate, ds.StudyTime = "20260301", "095500"
    ds.SeriesDate, ds.SeriesTime = "20260301", "100000"
    ds.ContentDate, ds.ContentTime = "20260301", "100000"
    ds.AcquisitionDateTime = "20260301100000"
    ds.AccessionNumber = ""
    ds.Modality = "MR"
    ds.PatientPosition = "HFS"
    ds.Manufacturer = "Phantom Works"
    ds.ManufacturerModelName = "Test Writer"
    ds.DeviceSerialNumber = "0001"
    ds.SoftwareVersions = "1"
    ds.ReferringPhysicianName = ""
    ds.StudyDescription = "Phantom planes"
    ds.SeriesDescription = "thermometry planes " + layout
    ds.PatientName = "Phantom^Planes"
    ds.PatientID = "PH-PLANES"
    ds.PatientBirthDate = ""
    ds.PatientSex = "O"
    ds.StudyInstanceUID = uid + ".1"
    ds.SeriesInstanceUID = uid + ".2"
    ds.StudyID = "1"
    ds.SeriesNumber = 7
    ds.InstanceNumber = 1
    ds.FrameOfReferenceUID = uid + ".4"
    ds.PositionReferenceIndicator = ""
    ds.AcquisitionNumber = 1
    ds.AcquisitionDuration = 12.0
    ds.ContentQualification = "RESEARCH"
    ds.ResonantNucleus = "1H"
    ds.KSpaceFiltering = "NONE"
    ds.MagneticFieldStrength = 3
    ds.ApplicableSafetyStandardAgency = "IEC"
    ds.ImageComments = "fictitious phantom"
    ds.PulseSequenceName = "GRE"
    ds.MRAcquisitionType = "2D"
    ds.EchoPulseSequence = "GRADIENT"
    ds.MultiPlanarExcitation = "NO"
    ds.PhaseContrast = "NO"
    ds.TimeOfFlightContrast = "NO"
    ds.SteadyStatePulseSequence = "NONE"
    ds.EchoPlanarPulseSequence = "NO"
    ds.SaturationRecovery = "NO"
    ds.SpectrallySelectedSuppression = "NONE"
    ds.OversamplingPhase = "NONE"
    ds.GeometryOfKSpaceTraversal = "RECTILINEAR"
    ds.RectilinearPhaseEncodeReordering = "LINEAR"
    ds.SegmentedKSpaceTraversal = "SINGLE"
    ds.NumberOfKSpaceTrajectories = 1
    ds.VolumetricProperties = "VOLUME"
    ds.VolumeBasedCalculationTechnique = "NONE"
    ds.ComplexImageComponent = "MIXED"
    ds.AcquisitionContrast = "PROTON_DENSITY"
    ds.PixelPresentation = "MONOCHROME"
    ds.BurnedInAnnotation = "NO"
    ds.LossyImageCompression = "00"
    ds.PresentationLUTShape = "IDENTITY"
    ds.AcquisitionContextSequence = Sequence([])
    ds.SamplesPerPixel = 1
    ds.PhotometricInterpretation = "MONOCHROME2"
    ds.Rows, ds.Columns = ROWS, COLS
    ds.BitsAllocated, ds.BitsStored, ds.HighBit = 16, 16, 15
    ds.PixelRepresentation = 0

    dim_org = uid + ".5"
    org = Dataset()
    org.DimensionOrganizationUID = dim_org
    ds.DimensionOrganizationSequence = Sequence([org])
    index = []
    dims = ((0x00209056, "Stack"), (0x00209057, "Position in stack"), (0x00209128, "Time point"))
    if layout in ("no-id", "some-id"):
        dims = dims[2:]
    for pointer, label in dims:
        d = Dataset()
        d.DimensionOrganizationUID = dim_org
        d.DimensionIndexPointer = pointer
        d.FunctionalGroupPointer = 0x00209111
        d.DimensionDescriptionLabel = label
        index.append(d)
    ds.DimensionIndexSequence = Sequence(index)

    shared = Dataset()
    pm = Dataset()
    pm.PixelSpacing = [SPACING, SPACING]
    pm.SliceThickness = 3
    shared.PixelMeasuresSequence = Sequence([pm])
    pvt = Dataset()
    pvt.RescaleIntercept, pvt.RescaleSlope, pvt.RescaleType = 0, 1, "US"
    shared.PixelValueTransformationSequence = Sequence([pvt])
    echo = Dataset()
    echo.EffectiveEchoTime = 12.8
    shared.MREchoSequence = Sequence([echo])
    anat = Dataset()
    anat.AnatomicRegionSequence = Sequence([code("818981001", "SCT", "Abdomen")])
    anat.FrameLaterality = "U"
    shared.FrameAnatomySequence = Sequence([anat])
    timing = Dataset()
    timing.RepetitionTime = 30
    timing.FlipAngle = 20
    timing.EchoTrainLength = 1
    timing.RFEchoTrainLength = 0
    timing.GradientEchoTrainLength = 1
    sar = Dataset()
    sar.SpecificAbsorptionRateDefinition = "IEC_WHOLE_BODY"
    sar.SpecificAbsorptionRateValue = 0.5
    timing.SpecificAbsorptionRateSequence = Sequence([sar])
    mode = Dataset()
    mode.OperatingModeType = "STATIC FIELD"
    mode.OperatingMode = "IEC_NORMAL"
    timing.OperatingModeSequence = Sequence([mode])
    shared.MRTimingAndRelatedParametersSequence = Sequence([timing])
    fov = Dataset()
    fov.InPlanePhaseEncodingDirection = "ROW"
    fov.MRAcquisitionFrequencyEncodingSteps = COLS
    fov.MRAcquisitionPhaseEncodingStepsInPlane = ROWS
    fov.PercentSampling = 100
    fov.PercentPhaseFieldOfView = 100
    shared.MRFOVGeometrySequence = Sequence([fov])
    mod = Dataset()
    mod.InversionRecovery = "NO"
    mod.FlowCompensation = "NONE"
    mod.Spoiling = "RF"
    mod.T2Preparation = "NO"
    mod.SpectrallySelectedExcitation = "NONE"
    mod.SpatialPresaturation = "NONE"
    mod.PartialFourier = "NO"
    mod.ParallelAcquisition = "NO"
    shared.MRModifierSequence = Sequence([mod])
    imod = Dataset()
    imod.PixelBandwidth = 200
    imod.MagnetizationTransfer = "NONE"
    imod.BloodSignalNulling = "NO"
    imod.Tagging = "NONE"
    imod.TransmitterFrequency = 127.7
    shared.MRImagingModifierSequence = Sequence([imod])
    rcv = Dataset()
    rcv.ReceiveCoilName = "BODY"
    rcv.ReceiveCoilType = "BODY"
    rcv.QuadratureReceiveCoil = "NO"
    rcv.ReceiveCoilManufacturerName = ""
    shared.MRReceiveCoilSequence = Sequence([rcv])
    tx = Dataset()
    tx.TransmitCoilName = "BODY"
    tx.TransmitCoilType = "BODY"
    tx.TransmitCoilManufacturerName = ""
    shared.MRTransmitCoilSequence = Sequence([tx])
    avg = Dataset()
    avg.NumberOfAverages = 1
    shared.MRAveragesSequence = Sequence([avg])
    ds.SharedFunctionalGroupsSequence = Sequence([shared])

    per_frame = []
    pixels = []
    stacks = stacks_of(layout)
    for t in range(TIMES):
        for s, (stack_id, iop, centres) in enumerate(stacks, start=1):
            for k, centre in enumerate(centres):
                pos_number = k + 1
                if layout == "bad-order" and stack_id == "2":
                    pos_number = 1
                for comp in ("MAGNITUDE", "PHASE"):
                    # The second stack 0.5 s after the first, as an
                    # interleaved acquisition would.
                    sec = 3 * t + 0.5 * (s - 1)
                    fr = Dataset()
                    fc = Dataset()
                    fc.FrameAcquisitionNumber = 1
                    fc.FrameReferenceDateTime = "202603011000%09.6f" % sec
                    fc.FrameAcquisitionDateTime = "202603011000%09.6f" % sec
                    fc.FrameAcquisitionDuration = 500.0
                    if layout == "id-per-time":
                        fc.StackID = str(t + 1)
                        fc.InStackPositionNumber = pos_number + 2 * (s - 1)
                    elif layout != "no-id" and not (layout == "some-id" and t == TIMES - 1):
                        fc.StackID = "1" if layout == "mixed-id" else stack_id
                        fc.InStackPositionNumber = pos_number
                    fc.TemporalPositionIndex = t + 1
                    if layout in ("no-id", "some-id"):
                        fc.DimensionIndexValues = [t + 1]
                    elif layout == "id-per-time":
                        fc.DimensionIndexValues = [t + 1, pos_number + 2 * (s - 1), t + 1]
                    else:
                        fc.DimensionIndexValues = [s, pos_number, t + 1]
                    fr.FrameContentSequence = Sequence([fc])
                    pp = Dataset()
                    pp.ImagePositionPatient = plane_origin(iop, centre)
                    fr.PlanePositionSequence = Sequence([pp])
                    po = Dataset()
                    po.ImageOrientationPatient = iop
                    fr.PlaneOrientationSequence = Sequence([po])
                    ft = Dataset()
                    ft.FrameType = ["ORIGINAL", "PRIMARY", "TEMPERATURE", "NONE"]
                    ft.PixelPresentation = "MONOCHROME"
                    ft.VolumetricProperties = "VOLUME"
                    ft.VolumeBasedCalculationTechnique = "NONE"
                    ft.ComplexImageComponent = comp
                    ft.AcquisitionContrast = "PROTON_DENSITY"
                    fr.MRImageFrameTypeSequence = Sequence([ft])
                    per_frame.append(fr)
                    base = 2000 if comp == "MAGNITUDE" else 32768
                    v = base + 1000 * s + 100 * t + 10 * k
                    ii, jj = np.meshgrid(np.arange(COLS), np.arange(ROWS))
                    pixels.append((v + ii + jj).astype("<u2"))
    ds.PerFrameFunctionalGroupsSequence = Sequence(per_frame)
    ds.NumberOfFrames = len(per_frame)
    ds.PixelData = np.stack(pixels).tobytes()

    meta = FileMetaDataset()
    meta.MediaStorageSOPClassUID = ENHANCED_MR
    meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    meta.TransferSyntaxUID = ExplicitVRLittleEndian
    meta.ImplementationClassUID = uid + ".9"
    ds.file_meta = meta
    ds.is_little_endian, ds.is_implicit_VR = True, False
    ds.preamble = b"\0" * 128
    pydicom.dcmwrite(out, ds, write_like_original=False)


if __name__ == "__main__":
    main()
