package dosemap

import "math"

// Gamma is the gyromagnetic ratio of the proton, γ = 2π·42.57747892 MHz/T
// (CODATA 2014), in rad s⁻¹ T⁻¹.
const Gamma = 2 * math.Pi * 42.57747892e6

// Default PRF-shift parameters.
const (
	// DefaultAlpha is the PRF thermal coefficient in ppm/°C. −0.01 ppm/°C is
	// the value most often used for aqueous tissue (Ishihara et al., Magn
	// Reson Med 1995;34:814); pure water is −0.01036 ppm/°C.
	DefaultAlpha = -0.01
	// DefaultBodyTemp is the assumed baseline tissue temperature in °C.
	DefaultBodyTemp = 37.0
)

// PRF holds the parameters of proton-resonance-frequency-shift thermometry
// (Ishihara et al., Magn Reson Med 1995;34:814). A temperature change ΔT
// shifts the phase of a gradient-echo image by
//
//	Δφ = Sign · γ · α · B0 · TE · ΔT
//
// so that ΔT = Δφ / (Sign · γ · α · B0 · TE).
type PRF struct {
	Alpha float64 // thermal coefficient, ppm/°C (negative for water); 0 means DefaultAlpha
	B0    float64 // main field, tesla
	TE    float64 // echo time, seconds
	Sign  float64 // +1 or −1: the scanner's phase sign convention; 0 means +1
}

func (p PRF) alpha() float64 {
	if p.Alpha == 0 {
		return DefaultAlpha
	}
	return p.Alpha
}

func (p PRF) sign() float64 {
	if p.Sign < 0 {
		return -1
	}
	return 1
}

// PhasePerDegree returns the signed phase change per degree Celsius in
// rad/°C, Sign·γ·α·10⁻⁶·B0·TE. At 3 T, TE 12.8 ms and α = −0.01 ppm/°C its
// magnitude is 0.1027 rad/°C.
func (p PRF) PhasePerDegree() float64 {
	return p.sign() * Gamma * p.alpha() * 1e-6 * p.B0 * p.TE
}

// WrapLimit returns the largest temperature change, in °C, that a single
// phase difference wrapped into (−π, π] can represent unambiguously:
// π / |PhasePerDegree|. A change of twice this value turns the phase by a
// full 2π. At 3 T, TE 12.8 ms it is 30.6 °C; at 1.5 T, TE 20 ms 39.1 °C.
// Thermometry tracks larger changes by temporal unwrapping as long as the
// change between two frames stays below it.
func (p PRF) WrapLimit() float64 {
	return math.Pi / math.Abs(p.PhasePerDegree())
}

// NoiseSigma returns the standard deviation, in °C, of a PRF temperature
// difference between two images of signal-to-noise ratio snr:
//
//	σ_T = √2 / (|γ·α·B0·TE| · SNR)
//
// (phase noise 1/SNR per image; the √2 accounts for the difference of two
// images). At 3 T, TE 12.8 ms, SNR 50 it is 0.275 °C.
func (p PRF) NoiseSigma(snr float64) float64 {
	return sigmaOfSNR(math.Abs(p.PhasePerDegree()), snr)
}

// sigmaOfSNR is NoiseSigma with |PhasePerDegree| given (for loops over
// voxels).
func sigmaOfSNR(absPPD, snr float64) float64 { return math.Sqrt2 / (absPPD * snr) }

// wrapPhase maps x into (−π, π].
func wrapPhase(x float64) float64 {
	if x > -math.Pi && x <= math.Pi {
		return x
	}
	return x - 2*math.Pi*math.Ceil((x-math.Pi)/(2*math.Pi))
}
