package sampledata

import (
	"fmt"
	"strconv"
	"strings"
	"time"
)

// ParseArm parses an arm written NAME=SHARE:RATE[,RATE...], with one
// rate per metric: control=1:0.10,0.04.
func ParseArm(s string, metrics int) (ArmConfig, error) {
	var a ArmConfig
	name, rest, ok := strings.Cut(s, "=")
	share, rates, ok2 := strings.Cut(rest, ":")
	if !ok || !ok2 || name == "" {
		return a, fmt.Errorf("%q: want NAME=SHARE:RATE[,RATE], for example control=1:0.10,0.04", s)
	}
	a.Name = name
	v, err := strconv.ParseFloat(share, 64)
	if err != nil {
		return a, fmt.Errorf("%q: share %q is not a number", s, share)
	}
	a.Share = v
	for _, r := range strings.Split(rates, ",") {
		p, err := strconv.ParseFloat(strings.TrimSpace(r), 64)
		if err != nil {
			return a, fmt.Errorf("%q: rate %q is not a number", s, r)
		}
		a.Rates = append(a.Rates, p)
	}
	if len(a.Rates) != metrics {
		return a, fmt.Errorf("%q: %d rates for %d metrics", s, len(a.Rates), metrics)
	}
	return a, nil
}

// Truth is the generator's ground truth in the form armtally gen prints
// and writes it (--truth): the settings an analysis needs and, per arm,
// the units and the conversions counted while the events were placed.
type Truth struct {
	Experiment    string        `json:"experiment"`
	ExposureEvent string        `json:"exposure_event"`
	Seed          uint64        `json:"seed"`
	WindowStart   time.Time     `json:"window_start"`
	WindowEnd     time.Time     `json:"window_end"`
	Rows          int64         `json:"rows"`
	ExposureRows  int64         `json:"exposure_rows"`
	Units         int64         `json:"units"`
	NeverExposed  int64         `json:"never_exposed_units"`
	MultiArmUnits int64         `json:"multi_arm_units"`
	Metrics       []TruthMetric `json:"metrics"`
	Arms          []TruthArm    `json:"arms"`
}

// TruthMetric is one metric of a Truth.
type TruthMetric struct {
	Name          string `json:"name"`
	WindowSeconds int64  `json:"window_seconds"`
}

// TruthArm is one arm of a Truth.
type TruthArm struct {
	Name string `json:"name"`
	// Units counts units whose first exposure was in this arm, multi-arm
	// units included; SingleArmUnits leaves them out.
	Units          int64     `json:"units"`
	SingleArmUnits int64     `json:"single_arm_units"`
	TrueRates      []float64 `json:"true_rates"`
	Converted      []int64   `json:"converted"`
}

// NewTruth returns the ground truth of a log generated from cfg with
// seed, from the generator's summary s.
func NewTruth(cfg Config, seed uint64, s Summary) Truth {
	t := Truth{
		Experiment: cfg.Experiment, ExposureEvent: cfg.ExposureEvent, Seed: seed,
		WindowStart: cfg.Start.UTC(), WindowEnd: cfg.AnalysisEnd().UTC(),
		Rows: s.Rows, ExposureRows: s.ExposureRows, Units: s.Units,
		NeverExposed: s.NeverExposedUnits, MultiArmUnits: s.MultiArmUnits,
	}
	for _, m := range cfg.Metrics {
		t.Metrics = append(t.Metrics, TruthMetric{Name: m.Event, WindowSeconds: int64(m.Window / time.Second)})
	}
	for i, a := range cfg.Arms {
		t.Arms = append(t.Arms, TruthArm{
			Name: a.Name, Units: s.UnitsPerArm[i], SingleArmUnits: s.SingleArmUnits[i],
			TrueRates: a.Rates, Converted: s.Converted[i],
		})
	}
	return t
}
