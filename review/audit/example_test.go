package audit_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"

	"dosecover/review/audit"
)

// ExampleRun audits two cases with a stand-in analysis that reports one
// percent of coverage per file; a real audit passes the coverage analysis.
func ExampleRun() {
	tmp, _ := os.MkdirTemp("", "audit-example")
	defer os.RemoveAll(tmp)
	for _, c := range []string{"case-a", "case-b"} {
		os.MkdirAll(filepath.Join(tmp, "registry", c), 0o755)
		// A DICOM Part 10 file starts with a 128-byte preamble and "DICM".
		os.WriteFile(filepath.Join(tmp, "registry", c, "IM1"), append(make([]byte, 128), "DICM"...), 0o644)
	}
	countFiles := func(ctx context.Context, c *audit.Case) (*audit.CaseResult, error) {
		m := audit.NoMetrics()
		m.CoveragePct = audit.Num(len(c.Files))
		return &audit.CaseResult{Metrics: m}, nil
	}
	sum, err := audit.Run(context.Background(), audit.Config{
		Inputs:   []string{filepath.Join(tmp, "registry")},
		OutDir:   filepath.Join(tmp, "audit"),
		Workers:  2,
		Analyzer: countFiles,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, r := range sum.Rows {
		fmt.Println(r.Case, r.Status, r.Metrics.CoveragePct)
	}
	for _, f := range sum.Files {
		fmt.Println(filepath.Base(f))
	}
	fmt.Println("exit code", sum.ExitCode())
	// Output:
	// registry__case-a ok 1
	// registry__case-b ok 1
	// summary.csv
	// errors.csv
	// summary.png
	// exit code 0
}

// ExampleShard shows which of three shards takes each case. The shard is
// FNV-1a (64 bit) of the case path modulo 3, plus one; the expected lines
// were computed independently from the FNV-1a definition
// (Fowler, Noll, Vo; offset basis 0xcbf29ce484222325, prime 0x100000001b3).
func ExampleShard() {
	for k := 1; k <= 6; k++ {
		name := fmt.Sprintf("registry/case-%03d", k)
		for i := 1; i <= 3; i++ {
			if (audit.Shard{Index: i, Count: 3}).Contains(name) {
				fmt.Printf("%s in shard %d/3\n", name, i)
			}
		}
	}
	// Output:
	// registry/case-001 in shard 3/3
	// registry/case-002 in shard 3/3
	// registry/case-003 in shard 1/3
	// registry/case-004 in shard 1/3
	// registry/case-005 in shard 2/3
	// registry/case-006 in shard 2/3
}

// ExampleLoadSettings reads an audit's settings file: keys left out keep
// the defaults of the coverage analysis.
func ExampleLoadSettings() {
	dir, _ := os.MkdirTemp("", "audit-settings")
	defer os.RemoveAll(dir)
	p := filepath.Join(dir, "brain.json")
	os.WriteFile(p, []byte(`{"threshold": 100, "margin_mm": 2}`), 0o644)
	s, err := audit.LoadSettings(p)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, c := range audit.SettingsColumns(s) {
		fmt.Printf("%s=%s\n", c.Name, c.Value)
	}
	// Output:
	// model=cem43
	// threshold=100
	// margin_mm=2
	// trials=50
	// seed=1
}
