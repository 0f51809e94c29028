package report_test

import (
	"fmt"
	"math"
	"os"

	"dosecover/review/report"
)

// A hand-made input is enough to write the metrics; FromResult fills one
// from an analysis.
func ExampleWriteCSV() {
	in := &report.Input{
		CaseLabel: "phantom",
		Facts: report.Facts{
			DoseUnit: "CEM43 min", Threshold: 240, MarginMM: 3,
			TargetVolumeML: 2.5, Covered: 0.96, CoveredLow: math.NaN(), CoveredHigh: math.NaN(),
			CoveredOfTarget: 0.95, NotMonitored: 0.01, LethalML: 3.1,
			D98: math.NaN(), D50: 2200, D2: math.NaN(),
			Holes:           []report.Region{{VolumeML: 0.1, DepthMM: 1.5}},
			OutsideMarginML: 0,
		},
		Quality: report.Quality{MaxMotion: math.NaN(), MaxDriftC: math.NaN(), MinSNR: math.NaN()},
	}
	if err := report.WriteCSV(os.Stdout, in); err != nil {
		fmt.Println(err)
	}
	// Output:
	// name,value,unit
	// schema_version,1,
	// threshold,240,CEM43 min
	// margin_mm,3,mm
	// target.volume_ml,2.5,mL
	// target.covered_fraction,0.96,1
	// target.covered_fraction_of_target,0.95,1
	// target.not_monitored_fraction,0.01,1
	// lethal_ml,3.1,mL
	// target.d50,2200,CEM43 min
	// holes.count,1,count
	// holes.total_ml,0.1,mL
	// holes.1.volume_ml,0.1,mL
	// holes.1.depth_mm,1.5,mm
	// outside.lethal_ml,0,mL
	// outside.count,0,count
	// quality.frames,0,count
	// quality.flagged_frames,0,count
	// quality.suspected_wraps,0,count
	// quality.invalidated_voxel_frames,0,count
}

func ExampleDeidentifiedLabel() {
	// The hex digits are SHA-256("case of a person\x0000ff")[:4], as
	// Python's hashlib.sha256 gives them.
	fmt.Println(report.DeidentifiedLabel("case of a person", "00ff"))
	fmt.Println(report.DeidentifiedLabel("case of a person", "00ff") == report.DeidentifiedLabel("another case", "00ff"))
	// Output:
	// Teaching case 0A62FB45
	// false
}
