package sampledata

import (
	"errors"
	"fmt"
	"math"
	"time"
)

// ErrInvalidConfig is wrapped by every error that Validate returns.
var ErrInvalidConfig = errors.New("invalid sample data config")

// Limits that keep a generator's memory and run time sane. They are
// constants, not settings.
const (
	// DefaultRowGroupSize is the Parquet row group size used when
	// Config.RowGroupSize is 0.
	DefaultRowGroupSize = 1 << 20
	// MaxShuffleBlock is the largest Config.ShuffleBlock accepted; the
	// shuffle buffer holds that many rows.
	MaxShuffleBlock = 1 << 20
	// MaxRowGroupSize is the largest Config.RowGroupSize accepted; the
	// Parquet writer holds one row group before it flushes.
	MaxRowGroupSize = 1 << 24
	// MaxNoiseEventsPerUser is the largest Config.NoiseEventsPerUser
	// accepted.
	MaxNoiseEventsPerUser = 1000
)

// ArmConfig describes one arm of the synthetic experiment.
type ArmConfig struct {
	// Name is the arm name written on exposure rows.
	Name string
	// Share is the planned traffic share. Shares are normalised by their
	// sum, so 1, 1, 1 and 1/3, 1/3, 1/3 are the same split.
	Share float64
	// Rates holds, per entry of Config.Metrics, the true probability that a
	// unit of this arm converts within that metric's window.
	Rates []float64
}

// MetricConfig describes one conversion metric.
type MetricConfig struct {
	// Event is the conversion event name.
	Event string
	// Window is the attribution window: a converting unit's conversion
	// happens at a delay drawn uniformly in [0, Window) after its first
	// exposure, and an analysis should use this window.
	Window time.Duration
}

// PlatformConfig describes one value of the platform segment column.
type PlatformConfig struct {
	// Name is the value written in the platform column.
	Name string
	// Share is the share of units on this platform (normalised like
	// ArmConfig.Share).
	Share float64
}

// Config describes a synthetic experiment event log. DemoConfig returns a
// complete example; Validate says what is accepted.
type Config struct {
	// Users is the number of exposed units.
	Users int
	// Start is the lower bound of first exposure times.
	Start time.Time
	// ExposureDays is the number of days over which first exposures are
	// spread uniformly.
	ExposureDays int
	// Experiment is the experiment key written on exposure rows.
	Experiment string
	// ExposureEvent is the event name of exposure rows.
	ExposureEvent string
	// Arms lists the arms; Arms[0] is the control.
	Arms []ArmConfig
	// Metrics lists the conversion metrics, in the order of ArmConfig.Rates.
	Metrics []MetricConfig
	// Platforms lists the values of the platform column. Every row of a
	// unit carries the unit's platform.
	Platforms []PlatformConfig
	// NoiseEvents lists the names of events that are neither exposures nor
	// conversions (page views, searches and the like).
	NoiseEvents []string
	// NoiseEventsPerUser is the mean number of noise events per unit; about
	// 30% of them fall before the unit's first exposure.
	NoiseEventsPerUser float64
	// RepeatExposureProb is the probability that a unit gets a later repeat
	// exposure in the same arm.
	RepeatExposureProb float64
	// CrossArmProb is the probability that a unit also gets a later
	// exposure in a second arm, which makes it a multi-arm unit.
	CrossArmProb float64
	// PreExposureConvProb is the probability that a unit has a conversion
	// event before its first exposure, which an analysis must ignore.
	PreExposureConvProb float64
	// NeverExposedUsers is the number of extra units that have events but
	// no exposure.
	NeverExposedUsers int
	// ShuffleBlock, when positive, shuffles each consecutive run of that
	// many rows so that rows come out of time order; 0 leaves each block
	// of units sorted by time.
	ShuffleBlock int
	// RowGroupSize is the number of rows per Parquet row group; 0 means
	// DefaultRowGroupSize.
	RowGroupSize int
}

// AnalysisEnd returns Start + ExposureDays days + the longest metric window.
// Every first exposure is before Start + ExposureDays, so an analysis that
// ends there sees every unit's full window for every metric and counts every
// conversion the generator placed inside a window.
func (c Config) AnalysisEnd() time.Time {
	var longest time.Duration
	for _, m := range c.Metrics {
		longest = max(longest, m.Window)
	}
	return c.Start.Add(time.Duration(c.ExposureDays)*24*time.Hour + longest)
}

// Bounds on times. Every generated timestamp lies within Start - 7 days and
// AnalysisEnd + 2 longest windows, so with these bounds every timestamp fits
// int64 nanoseconds since 1970 (up to the year 2262).
const (
	maxExposureDays = 3660
	maxWindow       = 3660 * 24 * time.Hour
)

// minStart is the earliest Start accepted (a week after 1970 begins, room
// for pre-exposure events).
func minStart() time.Time { return time.Date(1970, time.January, 8, 0, 0, 0, 0, time.UTC) }

// maxStart is the first Start refused.
func maxStart() time.Time { return time.Date(2200, time.January, 1, 0, 0, 0, 0, time.UTC) }

// Validate reports the first problem with cfg, or nil. Every error wraps
// ErrInvalidConfig.
//
// It requires: Users > 0; NeverExposedUsers >= 0; Start in
// [1970-01-08, 2200-01-01); ExposureDays in [1, 3660]; non-empty Experiment and ExposureEvent; at least two arms
// with distinct non-empty names, finite positive shares and one rate in
// [0, 1] per metric; at least one metric, with distinct non-empty event
// names and a window of whole microseconds in (0, 3660 days]; at least one platform with a
// distinct non-empty name and a finite positive share; distinct non-empty
// noise event names (at least one when NoiseEventsPerUser > 0);
// NoiseEventsPerUser in [0, MaxNoiseEventsPerUser]; the three
// probabilities in [0, 1]; ShuffleBlock in [0, MaxShuffleBlock];
// RowGroupSize in [0, MaxRowGroupSize]. The exposure event, metric events
// and noise events must all differ.
func Validate(cfg Config) error {
	if err := cfg.validate(); err != nil {
		return fmt.Errorf("%w: %w", ErrInvalidConfig, err)
	}
	return nil
}

func (c Config) validate() error {
	if c.Users <= 0 {
		return fmt.Errorf("users = %d, want at least 1", c.Users)
	}
	if c.NeverExposedUsers < 0 {
		return fmt.Errorf("never exposed users = %d, want at least 0", c.NeverExposedUsers)
	}
	if c.Start.IsZero() {
		return errors.New("start time is not set")
	}
	if c.Start.Before(minStart()) || !c.Start.Before(maxStart()) {
		return fmt.Errorf("start time %s, want a time in [%s, %s)",
			c.Start.UTC().Format(time.RFC3339Nano), minStart().Format(time.RFC3339), maxStart().Format(time.RFC3339))
	}
	if c.ExposureDays < 1 || c.ExposureDays > maxExposureDays {
		return fmt.Errorf("exposure days = %d, want a value in [1, %d]", c.ExposureDays, maxExposureDays)
	}
	if c.Experiment == "" {
		return errors.New("experiment key is empty")
	}
	if c.ExposureEvent == "" {
		return errors.New("exposure event name is empty")
	}
	for _, check := range []func() error{c.validateEvents, c.validateArms, c.validatePlatforms, c.validateRest} {
		if err := check(); err != nil {
			return err
		}
	}
	return nil
}

// validateEvents checks the metrics and noise events.
func (c Config) validateEvents() error {
	// Event names: exposure, metrics and noise must not collide, or the
	// generated conversions would not mean what the rates say.
	events := map[string]string{c.ExposureEvent: "the exposure event"}
	claim := func(name, what string) error {
		if name == "" {
			return fmt.Errorf("%s has an empty event name", what)
		}
		if prev, ok := events[name]; ok {
			return fmt.Errorf("%s: event %q is already used by %s", what, name, prev)
		}
		events[name] = what
		return nil
	}

	if len(c.Metrics) == 0 {
		return errors.New("no metrics, want at least 1")
	}
	for i, m := range c.Metrics {
		what := fmt.Sprintf("metrics[%d]", i)
		if err := claim(m.Event, what); err != nil {
			return err
		}
		if m.Window <= 0 || m.Window > maxWindow || m.Window%time.Microsecond != 0 {
			return fmt.Errorf("%s %q: window %v, want a whole number of microseconds in (0, %v]", what, m.Event, m.Window, maxWindow)
		}
	}
	for i, name := range c.NoiseEvents {
		if err := claim(name, fmt.Sprintf("noise events[%d]", i)); err != nil {
			return err
		}
	}
	return nil
}

// validateArms checks the arms: at least two, named once each, a share
// and a rate per metric.
func (c Config) validateArms() error {
	if len(c.Arms) < 2 {
		return fmt.Errorf("%d arms, want at least 2 (a control and a treatment)", len(c.Arms))
	}
	arms := make(map[string]int, len(c.Arms))
	for i, a := range c.Arms {
		what := fmt.Sprintf("arms[%d]", i)
		if err := checkShare(arms, "arms", i, a.Name, a.Share); err != nil {
			return err
		}
		if len(a.Rates) != len(c.Metrics) {
			return fmt.Errorf("%s %q: %d rates for %d metrics, want one rate per metric", what, a.Name, len(a.Rates), len(c.Metrics))
		}
		for j, r := range a.Rates {
			if !(r >= 0 && r <= 1) {
				return fmt.Errorf("%s %q: rate %v for metric %q, want a value in [0, 1]", what, a.Name, r, c.Metrics[j].Event)
			}
		}
	}

	return nil
}

// validatePlatforms checks the platforms: at least one, named once each,
// with a share.
func (c Config) validatePlatforms() error {
	if len(c.Platforms) == 0 {
		return errors.New("no platforms, want at least 1")
	}
	platforms := make(map[string]int, len(c.Platforms))
	for i, p := range c.Platforms {
		if err := checkShare(platforms, "platforms", i, p.Name, p.Share); err != nil {
			return err
		}
	}
	return nil
}

// checkShare checks entry i of the list called list (arms or platforms):
// a name not used before (seen holds the earlier ones, and gets this one)
// and a finite share above 0.
func checkShare(seen map[string]int, list string, i int, name string, share float64) error {
	what := fmt.Sprintf("%s[%d]", list, i)
	if name == "" {
		return fmt.Errorf("%s has an empty name", what)
	}
	if j, ok := seen[name]; ok {
		return fmt.Errorf("%s: name %q is already used by %s[%d]", what, name, list, j)
	}
	seen[name] = i
	if !(share > 0) || math.IsInf(share, 0) {
		return fmt.Errorf("%s %q: share %v, want a finite value above 0", what, name, share)
	}
	return nil
}

// validateRest checks the rates of noise, repeats and cross-arm exposures
// and the block sizes.
func (c Config) validateRest() error {

	if !(c.NoiseEventsPerUser >= 0 && c.NoiseEventsPerUser <= MaxNoiseEventsPerUser) {
		return fmt.Errorf("noise events per user = %v, want a value in [0, %d]", c.NoiseEventsPerUser, MaxNoiseEventsPerUser)
	}
	if c.NoiseEventsPerUser > 0 && len(c.NoiseEvents) == 0 {
		return fmt.Errorf("noise events per user = %v but no noise event names", c.NoiseEventsPerUser)
	}
	for _, p := range []struct {
		name string
		v    float64
	}{
		{"repeat exposure probability", c.RepeatExposureProb},
		{"cross arm probability", c.CrossArmProb},
		{"pre-exposure conversion probability", c.PreExposureConvProb},
	} {
		if !(p.v >= 0 && p.v <= 1) {
			return fmt.Errorf("%s = %v, want a value in [0, 1]", p.name, p.v)
		}
	}
	if c.ShuffleBlock < 0 || c.ShuffleBlock > MaxShuffleBlock {
		return fmt.Errorf("shuffle block = %d, want a value in [0, %d]", c.ShuffleBlock, MaxShuffleBlock)
	}
	if c.RowGroupSize < 0 || c.RowGroupSize > MaxRowGroupSize {
		return fmt.Errorf("row group size = %d, want a value in [0, %d]", c.RowGroupSize, MaxRowGroupSize)
	}
	return nil
}

// DemoConfig returns the configuration of the embedded demo data set: a
// garden-plant web shop tries two new checkout flows against its current
// one. About 20,000 units over 14 days, split equally between "control",
// "one-page" (a single-page checkout: a real lift on purchase, 10% to 12%)
// and "saved-basket" (the basket kept between visits: no effect on either
// metric). The primary metric is "purchase" within 7 days, the secondary
// "newsletter_signup" within 3 days.
//
// It returns a fresh value each time; changing it does not change the
// embedded demo.
func DemoConfig() Config {
	return Config{
		Users:         20000,
		Start:         time.Date(2026, time.November, 2, 0, 0, 0, 0, time.UTC),
		ExposureDays:  14,
		Experiment:    "checkout-flow-2026",
		ExposureEvent: "exposure",
		Arms: []ArmConfig{
			{Name: "control", Share: 1, Rates: []float64{0.10, 0.04}},
			{Name: "one-page", Share: 1, Rates: []float64{0.12, 0.04}},
			{Name: "saved-basket", Share: 1, Rates: []float64{0.10, 0.04}},
		},
		Metrics: []MetricConfig{
			{Event: "purchase", Window: 7 * 24 * time.Hour},
			{Event: "newsletter_signup", Window: 3 * 24 * time.Hour},
		},
		Platforms: []PlatformConfig{
			{Name: "web", Share: 0.55},
			{Name: "ios", Share: 0.25},
			{Name: "android", Share: 0.20},
		},
		NoiseEvents:         []string{"page_view", "search", "add_to_cart"},
		NoiseEventsPerUser:  4,
		RepeatExposureProb:  0.3,
		CrossArmProb:        0.01,
		PreExposureConvProb: 0.02,
		NeverExposedUsers:   500,
		ShuffleBlock:        0,
		RowGroupSize:        50000,
	}
}
