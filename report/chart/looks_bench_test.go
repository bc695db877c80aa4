package chart

import (
	"context"
	"io"
	"path/filepath"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/history"
)

// BenchmarkNightlyHistory is what --history and --looks-chart add to a
// nightly run, apart from reading and tallying the log (whose size they do
// not depend on): open the history file, read the experiment's looks,
// store night 30 (replacing it, as a rerun does; with 30 days of daily
// exposures per arm) and draw the chart over the 30 looks, SVG or PNG.
//
//	go test -run '^$' -bench NightlyHistory -count 5 ./report/chart/
func BenchmarkNightlyHistory(b *testing.B) {
	looks := testLooks(30, experiment.MethodGroupSequential, 0)
	for i := range looks {
		for d := 0; d <= i; d++ {
			for _, arm := range []string{"control", "t"} {
				looks[i].Exposures = append(looks[i].Exposures, history.DailyExposure{Arm: arm, Day: time.Date(2026, 11, 2+d, 0, 0, 0, 0, time.UTC).Format(time.DateOnly), Units: 100})
			}
		}
	}
	r := experiment.Readout{Experiment: "exp", Control: "control", Settings: experiment.Settings{ConfidenceLevel: 0.95},
		Arms: []experiment.ArmUnits{{Name: "control"}, {Name: "t"}}, Metrics: []experiment.MetricReadout{{Name: "buy"}}}
	for _, f := range []struct {
		name   string
		format Format
	}{{"svg", SVG}, {"png", PNG}} {
		b.Run(f.name, func(b *testing.B) {
			ctx := context.Background()
			path := filepath.Join(b.TempDir(), "h.db")
			s, err := history.Open(ctx, path)
			if err != nil {
				b.Fatal(err)
			}
			for _, l := range looks {
				if err := s.Put(ctx, l); err != nil {
					b.Fatal(err)
				}
			}
			s.Close()
			for b.Loop() {
				s, err := history.Open(ctx, path)
				if err != nil {
					b.Fatal(err)
				}
				got, err := s.Looks(ctx, "exp")
				if err != nil || len(got) != 30 {
					b.Fatalf("%d looks, %v", len(got), err)
				}
				if err := s.Put(ctx, looks[29]); err != nil {
					b.Fatal(err)
				}
				if err := WriteLooks(io.Discard, r, got, Options{Format: f.format}); err != nil {
					b.Fatal(err)
				}
				s.Close()
			}
		})
	}
}
