// Package sim simulates focused-ultrasound ablation sessions and writes them
// as an MR scanner would: an anatomy series, one thermometry series (phase
// and magnitude) per sonication, and an RTSTRUCT with the target and an
// avoid structure. Heating is computed with the Pennes bioheat equation;
// thermometry phase follows the proton-resonance-frequency shift.
//
// The package also builds dosecover's demo case (WriteDemo, DemoDir), sets
// of varied cases (WriteCases) and a large typical session for benchmarks
// (WriteTypical). Every case folder carries truth.json with what was
// simulated. All data are invented; no real patient or site is involved.
package sim
