package audit

import (
	"context"
	"fmt"
	"path/filepath"
	"runtime"
	"sync"
	"testing"
	"time"

	"dosecover/dosemap/testkit"
)

// peakHeap samples the in-use heap every few milliseconds until stop is
// called and returns the largest value seen, in bytes.
func peakHeap() (stop func() uint64) {
	var mu sync.Mutex
	var peak uint64
	done := make(chan struct{})
	finished := make(chan struct{})
	go func() {
		defer close(finished)
		var ms runtime.MemStats
		tick := time.NewTicker(5 * time.Millisecond)
		defer tick.Stop()
		for {
			runtime.ReadMemStats(&ms)
			mu.Lock()
			peak = max(peak, ms.HeapInuse)
			mu.Unlock()
			select {
			case <-done:
				return
			case <-tick.C:
			}
		}
	}()
	return func() uint64 {
		close(done)
		<-finished
		mu.Lock()
		defer mu.Unlock()
		return peak
	}
}

// benchAudit runs a whole audit of the cases below in (a fresh output
// folder per iteration) and reports cases per minute, the peak heap above
// the starting heap per worker, the CPU seconds per case and the average
// number of cores kept busy (which tells a starved run on a shared machine
// from a framework that does not scale).
func benchAudit(b *testing.B, in string, cases int, workers int, a Analyzer) {
	benchAuditSettings(b, in, cases, workers, a, nil)
}

// benchAuditSettings is benchAudit with settings stored in the records.
func benchAuditSettings(b *testing.B, in string, cases int, workers int, a Analyzer, settings []byte) {
	b.Helper()
	runtime.GC()
	var base runtime.MemStats
	runtime.ReadMemStats(&base)
	stop := peakHeap()
	cpu0, cpuOK := testkit.ProcessCPU()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		out := filepath.Join(b.TempDir(), fmt.Sprint("out", i))
		sum, err := Run(context.Background(), Config{Inputs: []string{in}, OutDir: out, Workers: workers, Analyzer: a, Settings: settings})
		if err != nil {
			b.Fatal(err)
		}
		if sum.Analysed != cases {
			for _, r := range sum.Rows {
				if r.Status != StatusOK {
					b.Logf("%s: %s: %s", r.Case, r.Status, oneLine(r.Reason))
				}
			}
			b.Fatalf("analysed %d of %d cases", sum.Analysed, cases)
		}
	}
	b.StopTimer()
	cpu1, _ := testkit.ProcessCPU()
	peak := stop()
	if cpuOK && b.Elapsed() > 0 {
		// Cores kept busy on average: near the number of workers when the
		// machine is otherwise idle; lower when other work takes the CPU.
		b.ReportMetric((cpu1-cpu0).Seconds()/b.Elapsed().Seconds(), "cores-used")
		b.ReportMetric((cpu1-cpu0).Seconds()/float64(b.N*cases), "cpu-s/case")
	}
	perCase := b.Elapsed().Minutes() / float64(b.N*cases)
	b.ReportMetric(1/perCase, "cases/min")
	if peak > base.HeapInuse {
		b.ReportMetric(float64(peak-base.HeapInuse)/float64(workers)/(1<<20), "peak-MB/worker")
	}
}

// BenchmarkFramework measures the audit machinery alone (discovery,
// hashing, records, summary) with the file-counting stand-in analysis on
// cases of 1 to 3 small files: the overhead the framework adds per case.
func BenchmarkFramework(b *testing.B) {
	for _, n := range []int{10, 100} {
		in := makeCases(b, filepath.Join(b.TempDir(), "in"), n)
		for _, w := range []int{1, 2} {
			b.Run(fmt.Sprintf("cases=%d/workers=%d", n, w), func(b *testing.B) {
				benchAudit(b, in, n, w, newFileCounter().analyze)
			})
		}
	}
}
