package infer

import (
	"bufio"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"strconv"
	"testing"

	"edgewise/models"
)

var flBenchNs = []int{5, 20, 100}

// BenchmarkFluctuationTest10M is the count-stopped test (n = 5, 20, 100,
// 200 bootstrap replicates each) on 10^7 events in memory.
//
//	go test -run '^$' -bench Fluct -benchtime 3x -benchmem ./infer
func BenchmarkFluctuationTest10M(b *testing.B) {
	net := flRing([]float64{3, 2, 1.5}, []float64{0.5, 0.4, 0.6})
	d := flSimulate(b, net, 2_500_000, 4, 1)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := FluctuationTest(d, flBenchNs, FluctOptions{Seed: 1}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(d.Events()), "ns/event")
}

// BenchmarkFluctuationFixedTime10M is the same with the fixed-time
// contrast.
func BenchmarkFluctuationFixedTime10M(b *testing.B) {
	net := flRing([]float64{3, 2, 1.5}, []float64{0.5, 0.4, 0.6})
	d := flSimulate(b, net, 2_500_000, 4, 1)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := FluctuationTest(d, flBenchNs, FluctOptions{Seed: 1, FixedTime: true}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(d.Events()), "ns/event")
}

// BenchmarkReadSummaryFluct10M is the whole path of `edgewise fluct`
// without bounds: read a CSV file of 10^7 events (1e-6 clock), summarise
// it and run the fluctuation test with the fixed-time contrast. Peak
// memory: run the test binary under /usr/bin/time -v; the file is written
// one record (and one chunk of events) at a time, so that the setup's own
// memory stays far below the measured path's.
func BenchmarkReadSummaryFluct10M(b *testing.B) {
	net := flRing([]float64{3, 2, 1.5}, []float64{0.5, 0.4, 0.6})
	path := filepath.Join(b.TempDir(), "big.csv")
	n := flWriteBig(b, net, path, 2_500_000, 4, 1)
	runtime.GC()
	debug.FreeOSMemory()
	b.ResetTimer()
	cpu0 := processCPU()
	for i := 0; i < b.N; i++ {
		d, _, err := ReadFile(path, ReadOptions{})
		if err != nil {
			b.Fatal(err)
		}
		if _, err := Summarize(d, SummaryOptions{}); err != nil {
			b.Fatal(err)
		}
		if _, err := FluctuationTest(d, flBenchNs, FluctOptions{Seed: 1, FixedTime: true}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(n), "ns/event")
	if cpu := processCPU() - cpu0; cpu > 0 {
		b.ReportMetric(float64(cpu.Nanoseconds())/float64(b.N)/float64(n), "cpu-ns/event")
	}
}

// flWriteBig writes the events flSimulate(net, events, records, seed)
// would give, with times rounded to a 1e-6 clock (math.Round(t/1e-6)*1e-6,
// so that about a third need 16-17 digits), as WriteRecords would write
// them (header record,time,label; IDs "1", "2", ...; shortest 'g'
// times), drawing 4096 events at a time. It returns the number of events.
func flWriteBig(b *testing.B, net *models.Network, path string, events, records int, seed uint64) int {
	sim, err := models.NewSimulator(net, seed)
	if err != nil {
		b.Fatal(err)
	}
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	w := bufio.NewWriterSize(f, 1<<16)
	w.WriteString("record,time,label\n")
	buf := make([]models.Event, 0, 4096)
	line := make([]byte, 0, 64)
	for r := 0; r < records; r++ {
		sim.StartStationary()
		id := strconv.Itoa(r + 1)
		for left := events; left > 0; {
			buf, _ = sim.Visible(min(left, 4096), buf[:0])
			left -= len(buf)
			for _, e := range buf {
				line = append(line[:0], id...)
				line = append(line, ',')
				line = strconv.AppendFloat(line, math.Round(e.Time/1e-6)*1e-6, 'g', -1, 64)
				line = append(line, ',')
				line = append(line, net.Labels[e.Label].Name...)
				line = append(line, '\n')
				w.Write(line)
			}
		}
	}
	if err := w.Flush(); err != nil {
		b.Fatal(err)
	}
	if err := f.Close(); err != nil {
		b.Fatal(err)
	}
	return events * records
}
