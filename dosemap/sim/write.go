package sim

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomwrite"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// PhaseScale is the phase in radians of one stored unit of the thermometry
// phase images: the wrapped phase [−π, π) maps onto the 12-bit signed range
// [−2048, 2047]. The files carry it in RealWorldValueMappingSequence
// (slope π/2048 rad, intercept 0).
const PhaseScale = math.Pi / 2048

// Folder and file names inside a written case.
const (
	AnatomyFolder    = "anatomy"
	StructuresFile   = "structures/rtstruct.dcm"
	TruthFile        = "truth.json"
	sonicationFolder = "sonication-%02d"
)

// ids holds the UIDs shared by the files of one session.
type ids struct {
	seed           string
	study, frame   string
	anatomySeries  string
	structSeries   string
	structInstance string
}

func newIDs(s *Session) ids {
	p := fmt.Sprintf("%s/%d/", s.Label, s.Seed)
	return ids{seed: p, study: UID(p + "study"), frame: UID(p + "frame-of-reference"),
		anatomySeries: UID(p + "anatomy"), structSeries: UID(p + "rtstruct-series"), structInstance: UID(p + "rtstruct")}
}

func (id ids) thermoSeries(n int) string { return UID(fmt.Sprintf("%sthermometry/%d", id.seed, n)) }

func (id ids) instance(series string, n int) string { return UID(fmt.Sprintf("%s/%d", series, n)) }

func dicomDate(t time.Time) string { return t.Format("20060102") }
func dicomTime(t time.Time) string { return t.Format("150405.000") }
func dicomDateTime(t time.Time) string {
	return t.Format("20060102150405.000")
}

// patientStudy adds the Patient, General Study, General Equipment and SOP
// Common attributes shared by every file (PS3.3 C.7.1.1, C.7.2.1, C.7.5.1,
// C.12.1).
func (s *Session) patientStudy(e *elems, id ids, sopClass, sopInstance string) {
	e.Add(tag.SpecificCharacterSet, "ISO_IR 100")
	e.Add(tag.SOPClassUID, sopClass)
	e.Add(tag.SOPInstanceUID, sopInstance)
	e.Add(tag.StudyDate, dicomDate(s.Start))
	e.Add(tag.StudyTime, dicomTime(s.Start.Add(-20*time.Minute)))
	e.Add(tag.AccessionNumber, "")
	e.Add(tag.Manufacturer, "dosecover simulator")
	e.Add(tag.ReferringPhysicianName, "")
	e.Add(tag.StudyDescription, "Focused ultrasound ablation (simulated)")
	e.Add(tag.ManufacturerModelName, "sim")
	e.Add(tag.PatientName, s.PatientName)
	e.Add(tag.PatientID, s.PatientID)
	e.Add(tag.PatientBirthDate, "")
	e.Add(tag.PatientSex, "O")
	e.Add(tag.PatientIdentityRemoved, "YES")
	e.Add(tag.DeidentificationMethod, "invented data: simulated phantom, no patient involved")
	e.Add(tag.DeviceSerialNumber, "0")
	e.Add(tag.SoftwareVersions, dosemap.Version)
	e.Add(tag.StudyInstanceUID, id.study)
	e.Add(tag.StudyID, "1")
}

// mrImage holds one MR image to be written.
type mrImage struct {
	seriesUID, instanceUID string
	seriesNumber, instance int
	description            string
	imageType              []string
	complex                string // ComplexImageComponent; "" for none
	geom                   dosemap.Geometry
	slice                  int
	acquired, seriesStart  time.Time
	acquisition, temporal  int // AcquisitionNumber, TemporalPositionIdentifier (0: none)
	temporalPositions      int
	signed                 bool
	pixels                 []uint16
	center, width          float64
	te, tr, flip, b0       float64
	thickness              float64
}

// encodeMR returns the bytes of an MR Image Storage file (PS3.3 A.4):
// Patient, General Study, General Series, Frame of Reference, General
// Equipment, General Image, General Acquisition, Image Plane, Image Pixel,
// MR Image, VOI LUT and SOP Common modules.
func (s *Session) encodeMR(id ids, im *mrImage) ([]byte, error) {
	var e elems
	s.patientStudy(&e, id, SOPClassMRImage, im.instanceUID)
	g := im.geom
	e.Add(tag.ImageType, im.imageType)
	e.Add(tag.InstanceCreationDate, dicomDate(im.acquired))
	e.Add(tag.InstanceCreationTime, dicomTime(im.acquired))
	e.Add(tag.SeriesDate, dicomDate(im.seriesStart))
	e.Add(tag.SeriesTime, dicomTime(im.seriesStart))
	e.Add(tag.AcquisitionDate, dicomDate(im.acquired))
	e.Add(tag.AcquisitionTime, dicomTime(im.acquired))
	e.Add(tag.ContentDate, dicomDate(im.acquired))
	e.Add(tag.ContentTime, dicomTime(im.acquired))
	e.Add(tag.AcquisitionDateTime, dicomDateTime(im.acquired))
	e.Add(tag.Modality, "MR")
	e.Add(tag.Laterality, "") // type 2C: an unpaired object
	e.Add(tag.SeriesDescription, im.description)
	if im.complex != "" {
		e.Add(tag.ComplexImageComponent, im.complex)
	}
	e.Add(tag.ScanningSequence, "GR")
	e.Add(tag.SequenceVariant, "SP")
	e.Add(tag.ScanOptions, "")
	e.Add(tag.MRAcquisitionType, "2D")
	e.Add(tag.SequenceName, "sim_gre")
	e.Add(tag.SliceThickness, ds(im.thickness))
	e.Add(tag.RepetitionTime, ds(im.tr*1e3))
	e.Add(tag.EchoTime, ds(im.te*1e3))
	e.Add(tag.NumberOfAverages, "1")
	e.Add(tag.ImagingFrequency, ds(42.57747892*im.b0))
	e.Add(tag.ImagedNucleus, "1H")
	e.Add(tag.EchoNumbers, "1")
	e.Add(tag.MagneticFieldStrength, ds(im.b0))
	e.Add(tag.SpacingBetweenSlices, ds(g.Spacing[2]))
	e.Add(tag.EchoTrainLength, "1")
	e.Add(tag.FlipAngle, ds(im.flip))
	e.Add(tag.PatientPosition, "HFS")
	e.Add(tag.SeriesInstanceUID, im.seriesUID)
	e.Add(tag.SeriesNumber, fmt.Sprint(im.seriesNumber))
	e.Add(tag.AcquisitionNumber, fmt.Sprint(max(im.acquisition, 1)))
	e.Add(tag.InstanceNumber, fmt.Sprint(im.instance))
	ipp := e.AddImagePlane(g, im.slice)
	e.Add(tag.FrameOfReferenceUID, id.frame)
	if im.temporal > 0 {
		e.Add(tag.TemporalPositionIdentifier, fmt.Sprint(im.temporal))
		e.Add(tag.NumberOfTemporalPositions, fmt.Sprint(im.temporalPositions))
	}
	e.Add(tag.PositionReferenceIndicator, "")
	e.Add(tag.SliceLocation, ds(ipp.Dot(g.Row.Cross(g.Col))))
	e.Add(tag.SamplesPerPixel, 1)
	e.Add(tag.PhotometricInterpretation, "MONOCHROME2")
	e.Add(tag.BitsAllocated, 16)
	e.Add(tag.BitsStored, 12)
	e.Add(tag.HighBit, 11)
	if im.signed {
		e.Add(tag.PixelRepresentation, 1)
	} else {
		e.Add(tag.PixelRepresentation, 0)
	}
	if im.width > 0 {
		e.Add(tag.WindowCenter, ds(im.center))
		e.Add(tag.WindowWidth, ds(im.width))
	}
	if im.complex == "PHASE" {
		e.AddRealWorldValueMapping(dicomwrite.RealWorldValueMapping{
			Label: "PHASE", Explanation: "phase in radians",
			VR: "SS", First: -2048, Last: 2047, Intercept: 0, Slope: PhaseScale,
			UnitCode: "rad", UnitMeaning: "radian",
		})
	}
	e = append(e, pixelElement(im.pixels))
	return encode(SOPClassMRImage, im.instanceUID, e)
}

// rngFor returns a generator seeded from the session seed and a label, so
// every image gets its own reproducible noise regardless of the order or the
// goroutine that generates it.
func (s *Session) rngFor(label string) *rand.Rand {
	h := fnv.New64a()
	var b [8]byte
	binary.LittleEndian.PutUint64(b[:], s.Seed)
	h.Write(b[:])
	h.Write([]byte(label))
	v := h.Sum64()
	return rand.New(rand.NewPCG(v, v^0x9e3779b97f4a7c15))
}

// WriteSession simulates s and writes it into dir (which must exist): the
// anatomy series in anatomy/, one thermometry series per sonication in
// sonication-NN/, the RTSTRUCT in structures/ and truth.json. Every file is
// written under a temporary name and renamed into place.
func WriteSession(dir string, s *Session) (*Truth, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	res, err := s.simulate()
	if err != nil {
		return nil, fmt.Errorf("simulating %s: %w", s.Label, err)
	}
	id := newIDs(s)
	truth := s.truth(res, id)
	if err := s.writeAnatomy(dir, id, truth); err != nil {
		return nil, err
	}
	if err := s.writeThermometry(dir, id, res, truth); err != nil {
		return nil, err
	}
	if err := s.writeStructures(dir, id, truth); err != nil {
		return nil, err
	}
	data, err := json.MarshalIndent(truth, "", "  ")
	if err != nil {
		return nil, err
	}
	if err := writeFileAtomic(filepath.Join(dir, TruthFile), append(data, '\n')); err != nil {
		return nil, err
	}
	return truth, nil
}

// anatomyValue is the noiseless T2-like intensity of the phantom at p.
func (s *Session) anatomyValue(p dosemap.Vec3) float64 {
	ph := s.Phantom
	dx, dy := p[0]-ph.Center[0], p[1]-ph.Center[1]
	r := math.Hypot(dx, dy)
	// Smooth edges (logistic, 0.4 mm) stand in for partial volume.
	edge := func(d float64) float64 { return 1 / (1 + math.Exp(d/0.4)) }
	inGel := edge(r - ph.Radius)
	v := 1150 * inGel
	// Lesion: brighter, with an edge about 0.5 mm wide in level units.
	ll := ph.Lesion.level(p)
	lr := (math.Sqrt(ll) - 1) * ph.Lesion.SemiAxes[0]
	v += 650 * edge(lr) * inGel
	// Avoid tube: dark (fluid-free rod).
	tr := math.Hypot(p[0]-ph.Avoid.Center[0], p[1]-ph.Avoid.Center[1]) - ph.Avoid.Radius
	v -= 750 * edge(tr) * inGel
	// Receive-coil sensitivity falls off gently with depth (posterior coil).
	v *= 1 + 0.15*math.Tanh((ph.Center[1]-p[1])/80)
	return v
}

func (s *Session) writeAnatomy(dir string, id ids, truth *Truth) error {
	g := s.AnatomyGeometry()
	sub := filepath.Join(dir, AnatomyFolder)
	if err := os.MkdirAll(sub, 0o755); err != nil {
		return fmt.Errorf("creating %s: %w", sub, err)
	}
	acq := s.Start.Add(-12 * time.Minute)
	errs := make([]error, g.Slices)
	parallel(g.Slices, func(k int) {
		rng := s.rngFor(fmt.Sprintf("anatomy/%d", k))
		px := make([]uint16, g.SliceLen())
		for j := 0; j < g.Rows; j++ {
			for i := 0; i < g.Cols; i++ {
				v := s.anatomyValue(g.Point(float64(i), float64(j), float64(k)))
				// Rician noise, σ = 18 (SNR ≈ 64 in the gel).
				re, im := v+18*rng.NormFloat64(), 18*rng.NormFloat64()
				px[j*g.Cols+i] = clamp12u(math.Hypot(re, im))
			}
		}
		im := &mrImage{seriesUID: id.anatomySeries, instanceUID: id.instance(id.anatomySeries, k+1),
			seriesNumber: 2, instance: k + 1, description: "Anatomy T2w (phantom)",
			imageType: []string{"ORIGINAL", "PRIMARY", "M"}, geom: g, slice: k,
			acquired: acq.Add(time.Duration(k) * 200 * time.Millisecond), seriesStart: acq,
			pixels: px, center: 1200, width: 2400, te: 0.09, tr: 3.2, flip: 90, b0: s.Thermometry.B0,
			thickness: g.Spacing[2]}
		data, err := s.encodeMR(id, im)
		if err == nil {
			err = writeFileAtomic(filepath.Join(sub, fmt.Sprintf("IM%04d.dcm", k+1)), data)
		}
		errs[k] = err
	})
	for _, err := range errs {
		if err != nil {
			return fmt.Errorf("writing anatomy of %s: %w", s.Label, err)
		}
	}
	truth.Files += g.Slices
	return nil
}

func clamp12u(v float64) uint16 {
	x := math.Round(v)
	if x < 0 {
		return 0
	}
	if x > 4095 {
		return 4095
	}
	return uint16(x)
}

// phaseStored maps a phase in radians, wrapped into [−π, π), onto the
// 12-bit signed stored value and returns its 16-bit two's-complement word.
func phaseStored(phi float64) uint16 {
	w := math.Mod(phi+math.Pi, 2*math.Pi)
	if w < 0 {
		w += 2 * math.Pi
	}
	x := int(math.Round((w - math.Pi) / PhaseScale))
	if x > 2047 {
		x -= 4096 // +π wraps to −π
	}
	if x < -2048 {
		x = -2048
	}
	return uint16(int16(x))
}

// backgroundPhase is the smooth phase of the unheated object (B0
// inhomogeneity and receive phase), a few radians across the phantom so the
// stored phase wraps.
func (s *Session) backgroundPhase(p dosemap.Vec3) float64 {
	d := p.Sub(s.Phantom.Center)
	return 0.7 + 0.045*d[0] - 0.03*d[1] + 4e-4*(d[0]*d[0]-d[1]*d[1]) + 0.01*d[2]
}

// thermoMagnitude is the noiseless gradient-echo magnitude at p.
func (s *Session) thermoMagnitude(p dosemap.Vec3) float64 {
	return 1000 * s.anatomyValue(p) / 1150
}

func (s *Session) writeThermometry(dir string, id ids, res *simResult, truth *Truth) error {
	p := s.Thermometry
	ppd := p.PhasePerDegree()
	sigma := 1000 / p.SNR
	// Static per-voxel object properties, evaluated once per grid and
	// shift: the noiseless unheated signal m·e^{iφ_bg} of every voxel, as
	// re, im, and its distance along x from the phantom axis (drift
	// gradient).
	type object struct{ re, im, xoff []float64 }
	build := func(g dosemap.Geometry, shift dosemap.Vec3) object {
		o := object{re: make([]float64, g.Len()), im: make([]float64, g.Len()), xoff: make([]float64, g.Len())}
		for n := range o.re {
			i, j, k := g.IJK(n)
			pt := g.Point(float64(i), float64(j), float64(k))
			q := pt.Sub(shift)
			m, bg := s.thermoMagnitude(q), s.backgroundPhase(q)
			o.re[n], o.im[n] = m*math.Cos(bg), m*math.Sin(bg)
			o.xoff[n] = pt[0] - s.Phantom.Center[0]
		}
		return o
	}
	// Grids of every sonication's stacks and their still objects.
	grids := make([][]dosemap.Geometry, len(s.Sonications))
	stills := make([][]object, len(s.Sonications))
	byGrid := map[string]object{}
	for n := range s.Sonications {
		grids[n] = s.StackGeometries(n)
		for _, g := range grids[n] {
			key := fmt.Sprint(g)
			o, ok := byGrid[key]
			if !ok {
				o = build(g, dosemap.Vec3{})
				byGrid[key] = o
			}
			stills[n] = append(stills[n], o)
		}
	}
	type job struct{ son, frame int }
	var jobs []job
	for n := range s.Sonications {
		sub := filepath.Join(dir, fmt.Sprintf(sonicationFolder, n+1))
		if err := os.MkdirAll(sub, 0o755); err != nil {
			return fmt.Errorf("creating %s: %w", sub, err)
		}
		for f := 0; f < p.Frames; f++ {
			jobs = append(jobs, job{n, f})
		}
		if s.Layout != LayoutSlab {
			truth.Sonications[n].Stacks = grids[n]
		}
	}
	errs := make([]error, len(jobs))
	files := make([]int, len(jobs))
	parallel(len(jobs), func(jn int) {
		jb := jobs[jn]
		n, f := jb.son, jb.frame
		ts := truth.Sonications[n]
		start := ts.Start
		var shift dosemap.Vec3
		for _, m := range s.Motion {
			if m.Sonication == n+1 && m.Frame == f+1 {
				shift = m.Shift
			}
		}
		t := float64(f) * p.FrameInterval
		// Absolute time since the session start drives the drift.
		tabs := ts.Offset + t
		sub := filepath.Join(dir, fmt.Sprintf(sonicationFolder, n+1))
		ns := len(grids[n])
		for st, g := range grids[n] {
			obj := stills[n][st]
			rise := res.stacks[n][st][f]
			if shift != (dosemap.Vec3{}) {
				obj = build(g, shift)
				rise = shiftField(g, rise, shift)
			}
			label := fmt.Sprintf("thermometry/%d/%d", n, f)
			if st > 0 {
				label = fmt.Sprintf("thermometry/%d/%d/stack%d", n, f, st)
			}
			rng := s.rngFor(label)
			mag := make([]uint16, g.Len())
			pha := make([]uint16, g.Len())
			for v := range mag {
				// Signal = unheated signal × e^{i(PRF shift + drift)} + noise.
				dphi := ppd*float64(rise[v]) + (p.DriftRate+p.DriftGradient*obj.xoff[v]/100)*tabs
				c, sn := math.Cos(dphi), math.Sin(dphi)
				re := obj.re[v]*c - obj.im[v]*sn + sigma*rng.NormFloat64()
				im := obj.re[v]*sn + obj.im[v]*c + sigma*rng.NormFloat64()
				mag[v] = clamp12u(math.Sqrt(re*re + im*im))
				pha[v] = phaseStored(math.Atan2(im, re))
			}
			// The planes of one frame are acquired one after the other.
			acq := start.Add(time.Duration((t + float64(st)*p.FrameInterval/float64(ns+1)) * float64(time.Second)))
			for k := 0; k < g.Slices; k++ {
				for c, comp := range []struct {
					name, code string
					px         []uint16
				}{{"MAGNITUDE", "M", mag}, {"PHASE", "P", pha}} {
					series, number, desc := ts.SeriesUID, 100+n+1, fmt.Sprintf("Thermometry sonication %d", n+1)
					inst := (f*g.Slices+k)*2 + c + 1
					switch s.Layout {
					case LayoutTwoPlanes: // one phase and one magnitude series, both planes in each
						inst = (f*ns+st)*g.Slices + k + 1
						if comp.code == "M" {
							series, number, desc = UID(ts.SeriesUID+"/magnitude"), 300+n+1, desc+" magnitude"
						}
					case LayoutTwoPlaneSeries: // one series per plane
						if st > 0 {
							series, number = UID(ts.SeriesUID+"/plane2"), 300+n+1
						}
						desc += " " + orientationWord(g)
					}
					im := &mrImage{seriesUID: series, instanceUID: id.instance(series, inst),
						seriesNumber: number, instance: inst,
						description: desc,
						imageType:   []string{"ORIGINAL", "PRIMARY", comp.code}, complex: comp.name,
						geom: g, slice: k, acquired: acq.Add(time.Duration(k) * 20 * time.Millisecond), seriesStart: start,
						acquisition: f + 1, temporal: f + 1, temporalPositions: p.Frames, signed: comp.code == "P",
						pixels: comp.px[k*g.SliceLen() : (k+1)*g.SliceLen()],
						te:     p.TE, tr: p.TR, flip: p.FlipAngle, b0: p.B0, thickness: p.SliceThickness}
					if comp.code == "M" {
						im.center, im.width = 900, 1800
					}
					data, err := s.encodeMR(id, im)
					if err == nil {
						name := fmt.Sprintf("IM%05d.dcm", inst)
						if ns > 1 {
							name = fmt.Sprintf("IM%d_%05d.dcm", st+1, (f*g.Slices+k)*2+c+1)
						}
						err = writeFileAtomic(filepath.Join(sub, name), data)
					}
					if err != nil {
						errs[jn] = err
						return
					}
					files[jn]++
				}
			}
		}
	})
	for _, err := range errs {
		if err != nil {
			return fmt.Errorf("writing thermometry of %s: %w", s.Label, err)
		}
	}
	for _, k := range files {
		truth.Files += k
	}
	return nil
}

// orientationWord names the orientation of g's slices.
func orientationWord(g dosemap.Geometry) string {
	n := g.Normal
	switch {
	case math.Abs(n[2]) > 0.999:
		return "axial"
	case math.Abs(n[1]) > 0.999:
		return "coronal"
	case math.Abs(n[0]) > 0.999:
		return "sagittal"
	}
	return "oblique"
}

// shiftField moves a field on g by shift mm (nearest voxel in plane, the
// slab is not shifted through-plane by more than it can hold).
func shiftField(g dosemap.Geometry, f []float32, shift dosemap.Vec3) []float32 {
	v := &dosemap.Volume{Geometry: g, Data: f}
	out := make([]float32, len(f))
	for n := range out {
		i, j, k := g.IJK(n)
		x := v.Sample(g.Point(float64(i), float64(j), float64(k)).Sub(shift))
		if x == x {
			out[n] = x
		}
	}
	return out
}

// parallel runs fn(0..n-1) on GOMAXPROCS goroutines.
func parallel(n int, fn func(int)) {
	workers := min(runtime.GOMAXPROCS(0), n)
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				fn(i)
			}
		}()
	}
	for i := 0; i < n; i++ {
		next <- i
	}
	close(next)
	wg.Wait()
}
