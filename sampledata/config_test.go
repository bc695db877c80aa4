package sampledata

import (
	"errors"
	"math"
	"strings"
	"testing"
	"time"
)

func TestValidate(t *testing.T) {
	tests := []struct {
		name   string
		change func(*Config)
		want   string // substring of the error; "" means valid
	}{
		{"demo config", func(*Config) {}, ""},
		{"no noise at all", func(c *Config) { c.NoiseEvents = nil; c.NoiseEventsPerUser = 0 }, ""},
		{"one platform", func(c *Config) { c.Platforms = c.Platforms[:1] }, ""},
		{"rates 0 and 1", func(c *Config) { c.Arms[1].Rates = []float64{0, 1} }, ""},
		{"largest shuffle block", func(c *Config) { c.ShuffleBlock = MaxShuffleBlock }, ""},
		{"default row group size", func(c *Config) { c.RowGroupSize = 0 }, ""},

		{"zero users", func(c *Config) { c.Users = 0 }, "users = 0"},
		{"negative users", func(c *Config) { c.Users = -5 }, "users = -5"},
		{"negative never exposed", func(c *Config) { c.NeverExposedUsers = -1 }, "never exposed users = -1"},
		{"start not set", func(c *Config) { c.Start = time.Time{} }, "start time is not set"},
		{"start before 1970", func(c *Config) { c.Start = time.Date(1969, 12, 31, 0, 0, 0, 0, time.UTC) }, "start time 1969-12-31T00:00:00Z"},
		{"start too late", func(c *Config) { c.Start = time.Date(2200, 1, 1, 0, 0, 0, 0, time.UTC) }, "start time 2200-01-01T00:00:00Z"},
		{"zero exposure days", func(c *Config) { c.ExposureDays = 0 }, "exposure days = 0"},
		{"too many exposure days", func(c *Config) { c.ExposureDays = 3661 }, "exposure days = 3661"},
		{"empty experiment", func(c *Config) { c.Experiment = "" }, "experiment key is empty"},
		{"empty exposure event", func(c *Config) { c.ExposureEvent = "" }, "exposure event name is empty"},

		{"one arm", func(c *Config) { c.Arms = c.Arms[:1] }, "1 arms, want at least 2"},
		{"empty arm name", func(c *Config) { c.Arms[2].Name = "" }, "arms[2] has an empty name"},
		{"duplicate arm", func(c *Config) { c.Arms[2].Name = "control" }, `arms[2]: name "control" is already used by arms[0]`},
		{"zero share", func(c *Config) { c.Arms[1].Share = 0 }, `arms[1] "one-page": share 0`},
		{"negative share", func(c *Config) { c.Arms[1].Share = -1 }, `share -1`},
		{"NaN share", func(c *Config) { c.Arms[1].Share = math.NaN() }, `share NaN`},
		{"infinite share", func(c *Config) { c.Arms[1].Share = math.Inf(1) }, `share +Inf`},
		{"too few rates", func(c *Config) { c.Arms[0].Rates = []float64{0.1} }, `arms[0] "control": 1 rates for 2 metrics`},
		{"too many rates", func(c *Config) { c.Arms[0].Rates = []float64{0.1, 0.1, 0.1} }, `3 rates for 2 metrics`},
		{"rate above 1", func(c *Config) { c.Arms[1].Rates[0] = 1.5 }, `rate 1.5 for metric "purchase", want a value in [0, 1]`},
		{"negative rate", func(c *Config) { c.Arms[1].Rates[1] = -0.1 }, `rate -0.1 for metric "newsletter_signup"`},
		{"NaN rate", func(c *Config) { c.Arms[1].Rates[1] = math.NaN() }, `rate NaN`},

		{"no metrics", func(c *Config) { c.Metrics = nil }, "no metrics"},
		{"empty metric event", func(c *Config) { c.Metrics[0].Event = "" }, "metrics[0] has an empty event name"},
		{"metric is the exposure event", func(c *Config) { c.Metrics[0].Event = "exposure" }, `metrics[0]: event "exposure" is already used by the exposure event`},
		{"duplicate metric", func(c *Config) { c.Metrics[1].Event = "purchase" }, `metrics[1]: event "purchase" is already used by metrics[0]`},
		{"zero window", func(c *Config) { c.Metrics[0].Window = 0 }, `metrics[0] "purchase": window 0s`},
		{"fractional microsecond window", func(c *Config) { c.Metrics[0].Window = 1500 * time.Nanosecond }, `window 1.5µs, want a whole number of microseconds`},
		{"window too long", func(c *Config) { c.Metrics[0].Window = maxWindow + time.Microsecond }, `window 87840h0m0.000001s`},
		{"noise is a metric", func(c *Config) { c.NoiseEvents[1] = "purchase" }, `noise events[1]: event "purchase" is already used by metrics[0]`},
		{"empty noise name", func(c *Config) { c.NoiseEvents[0] = "" }, `noise events[0] has an empty event name`},
		{"noise without names", func(c *Config) { c.NoiseEvents = nil }, "noise events per user = 4 but no noise event names"},
		{"negative noise", func(c *Config) { c.NoiseEventsPerUser = -1 }, "noise events per user = -1"},
		{"too much noise", func(c *Config) { c.NoiseEventsPerUser = 1001 }, "noise events per user = 1001"},

		{"no platforms", func(c *Config) { c.Platforms = nil }, "no platforms"},
		{"empty platform", func(c *Config) { c.Platforms[1].Name = "" }, "platforms[1] has an empty name"},
		{"duplicate platform", func(c *Config) { c.Platforms[2].Name = "web" }, `platforms[2]: name "web" is already used by platforms[0]`},
		{"zero platform share", func(c *Config) { c.Platforms[0].Share = 0 }, `platforms[0] "web": share 0`},

		{"repeat probability above 1", func(c *Config) { c.RepeatExposureProb = 1.01 }, "repeat exposure probability = 1.01"},
		{"cross arm probability negative", func(c *Config) { c.CrossArmProb = -0.5 }, "cross arm probability = -0.5"},
		{"pre-exposure probability NaN", func(c *Config) { c.PreExposureConvProb = math.NaN() }, "pre-exposure conversion probability = NaN"},
		{"negative shuffle block", func(c *Config) { c.ShuffleBlock = -1 }, "shuffle block = -1"},
		{"huge shuffle block", func(c *Config) { c.ShuffleBlock = MaxShuffleBlock + 1 }, "shuffle block = 1048577"},
		{"negative row group size", func(c *Config) { c.RowGroupSize = -1 }, "row group size = -1"},
		{"huge row group size", func(c *Config) { c.RowGroupSize = MaxRowGroupSize + 1 }, "row group size = 16777217"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := DemoConfig()
			tt.change(&cfg)
			err := Validate(cfg)
			if tt.want == "" {
				if err != nil {
					t.Fatalf("Validate: %v, want nil", err)
				}
				return
			}
			if err == nil {
				t.Fatalf("Validate: nil, want an error containing %q", tt.want)
			}
			if !errors.Is(err, ErrInvalidConfig) {
				t.Errorf("Validate: %v does not wrap ErrInvalidConfig", err)
			}
			if !strings.Contains(err.Error(), tt.want) {
				t.Errorf("Validate: %q, want it to contain %q", err, tt.want)
			}
		})
	}
}

func TestAnalysisEnd(t *testing.T) {
	tests := []struct {
		name   string
		change func(*Config)
		want   time.Time
	}{
		// 2026-11-02 + 14 days = 2026-11-16, + longest window 7 days = 2026-11-23.
		{"demo", func(*Config) {}, time.Date(2026, 11, 23, 0, 0, 0, 0, time.UTC)},
		// 2026-11-02 + 1 day = 2026-11-03, + 3 days (the purchase window is
		// now shorter than the signup window) = 2026-11-06.
		{"one day, short purchase window", func(c *Config) {
			c.ExposureDays = 1
			c.Metrics[0].Window = time.Hour
		}, time.Date(2026, 11, 6, 0, 0, 0, 0, time.UTC)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := DemoConfig()
			tt.change(&cfg)
			if got := cfg.AnalysisEnd(); !got.Equal(tt.want) {
				t.Errorf("AnalysisEnd() = %v, want %v", got, tt.want)
			}
		})
	}
}
