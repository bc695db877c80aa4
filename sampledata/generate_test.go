package sampledata

import (
	"errors"
	"math"
	"math/rand/v2"
	"regexp"
	"runtime"
	"slices"
	"strconv"
	"testing"
	"time"
)

// trapConfig is the demo config with the traps an analysis must handle made
// frequent: repeats, multi-arm units, conversions before exposure and units
// never exposed.
func trapConfig(users int) Config {
	cfg := DemoConfig()
	cfg.Users = users
	cfg.NeverExposedUsers = users / 20
	cfg.RepeatExposureProb = 0.5
	cfg.CrossArmProb = 0.05
	cfg.PreExposureConvProb = 0.2
	cfg.ShuffleBlock = 0
	return cfg
}

// collect runs Generate and returns every row.
func collect(t *testing.T, cfg Config, seed uint64) []Event {
	t.Helper()
	var rows []Event
	if err := Generate(cfg, rand.NewPCG(seed, 1), func(e Event) error {
		rows = append(rows, e)
		return nil
	}); err != nil {
		t.Fatalf("Generate: %v", err)
	}
	return rows
}

// unitTruth is what an analysis that follows the event rules learns about
// one unit, computed from the rows alone.
type unitTruth struct {
	t0        time.Time
	arm       string
	arms      int    // distinct arms exposed
	exposures int    // exposure rows
	converted []bool // per metric: a metric event in [t0, t0+W)
	events    []Event
}

// tally applies the analysis rules to rows: t0 is the earliest exposure, the
// arm is its arm, a unit converts on a metric when any event of that metric
// has t0 <= ts < t0 + W. It works in two passes over the rows kept in memory
// per unit, independent of how the generator decided.
func tally(cfg Config, rows []Event) map[string]*unitTruth {
	units := make(map[string]*unitTruth)
	for _, e := range rows {
		u := units[e.User]
		if u == nil {
			u = &unitTruth{converted: make([]bool, len(cfg.Metrics))}
			units[e.User] = u
		}
		u.events = append(u.events, e)
		if e.Name != cfg.ExposureEvent {
			continue
		}
		u.exposures++
		if u.t0.IsZero() || e.TS.Before(u.t0) {
			u.t0, u.arm = e.TS, e.Arm
		}
	}
	for _, u := range units {
		seen := map[string]bool{}
		for _, e := range u.events {
			if e.Name == cfg.ExposureEvent {
				seen[e.Arm] = true
			}
		}
		u.arms = len(seen)
		if u.exposures == 0 {
			continue
		}
		for m, metric := range cfg.Metrics {
			end := u.t0.Add(metric.Window)
			for _, e := range u.events {
				if e.Name == metric.Event && !e.TS.Before(u.t0) && e.TS.Before(end) {
					u.converted[m] = true
				}
			}
		}
	}
	return units
}

func TestGenerateUnitRules(t *testing.T) {
	tests := []struct {
		name string
		cfg  Config
	}{
		{"traps", trapConfig(9000)},
		{"demo shape, shuffled", func() Config { c := DemoConfig(); c.Users = 5000; c.ShuffleBlock = 333; return c }()},
		// Windows shorter than the 3 days over which repeats usually fall:
		// every exposure must still come before AnalysisEnd.
		{"short windows", func() Config {
			c := trapConfig(3000)
			c.ExposureDays = 1
			c.Metrics[0].Window, c.Metrics[1].Window = time.Hour, 10*time.Minute
			return c
		}()},
		{"no noise, no traps", func() Config {
			c := DemoConfig()
			c.Users, c.NeverExposedUsers = 3000, 40
			c.NoiseEvents, c.NoiseEventsPerUser = nil, 0
			c.RepeatExposureProb, c.CrossArmProb, c.PreExposureConvProb = 0, 0, 0
			return c
		}()},
	}
	idPattern := regexp.MustCompile(`^u[0-9]{7}$`) // 7 digits: minIDDigits, the totals here are below 10^7
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := tt.cfg
			rows := collect(t, cfg, 7)
			units := tally(cfg, rows)

			// Every unit appears: Users exposed ones and NeverExposedUsers others.
			if got, want := len(units), cfg.Users+cfg.NeverExposedUsers; got != want {
				t.Fatalf("%d distinct users, want %d", got, want)
			}
			var late, pre, multi, repeats int
			for id, u := range units {
				if !idPattern.MatchString(id) {
					t.Fatalf("user id %q, want u and 7 digits", id)
				}
				n, _ := strconv.Atoi(id[1:])
				exposed := n <= cfg.Users // ids 1..Users are exposed, the rest never
				if exposed != (u.exposures > 0) {
					t.Fatalf("user %s: %d exposures, want exposed = %t", id, u.exposures, exposed)
				}
				platform := u.events[0].Platform
				var atT0 int
				for _, e := range u.events {
					if e.Platform != platform {
						t.Fatalf("user %s: platforms %q and %q, want one per unit", id, platform, e.Platform)
					}
					if e.TS.Location() != time.UTC || e.TS.Nanosecond()%1000 != 0 {
						t.Fatalf("user %s: ts %v, want UTC whole microseconds", id, e.TS)
					}
					isExposure := e.Name == cfg.ExposureEvent
					if isExposure != (e.Experiment != "") || isExposure != (e.Arm != "") {
						t.Fatalf("user %s: row %+v: experiment and arm must be set on exposure rows only", id, e)
					}
					if isExposure && e.Experiment != cfg.Experiment {
						t.Fatalf("user %s: experiment %q, want %q", id, e.Experiment, cfg.Experiment)
					}
					if isExposure && !e.TS.Before(cfg.AnalysisEnd()) {
						t.Fatalf("user %s: exposure at %v, not before AnalysisEnd %v", id, e.TS, cfg.AnalysisEnd())
					}
					if isExposure && e.TS.Equal(u.t0) {
						atT0++
					}
					if isExposure && !e.TS.Equal(u.t0) && e.Arm == u.arm {
						repeats++
					}
					if !exposed || isExposure {
						continue
					}
					for _, m := range cfg.Metrics {
						if e.Name != m.Event {
							continue
						}
						if e.TS.Before(u.t0) {
							pre++
						}
					}
				}
				if !exposed {
					continue
				}
				// The first exposure is unique: repeats and second arms come strictly later.
				if atT0 != 1 {
					t.Fatalf("user %s: %d exposure rows at t0, want 1", id, atT0)
				}
				if u.t0.Before(cfg.Start) || !u.t0.Before(cfg.Start.AddDate(0, 0, cfg.ExposureDays)) {
					t.Fatalf("user %s: t0 %v outside the exposure period", id, u.t0)
				}
				if u.arms > 2 {
					t.Fatalf("user %s: %d arms, want at most 2", id, u.arms)
				}
				if u.arms == 2 {
					multi++
				}
				for m, metric := range cfg.Metrics {
					if u.converted[m] {
						continue
					}
					for _, e := range u.events {
						if e.Name == metric.Event && !e.TS.Before(u.t0.Add(metric.Window)) {
							late++ // a non-converting unit's event after its window
							break
						}
					}
				}
			}
			// The traps must actually be present when configured.
			if cfg.CrossArmProb > 0 && multi == 0 {
				t.Error("no multi-arm units")
			}
			if cfg.RepeatExposureProb > 0 && repeats == 0 {
				t.Error("no repeat exposures")
			}
			if cfg.PreExposureConvProb > 0 && pre == 0 {
				t.Error("no conversion events before first exposure")
			}
			if cfg.PreExposureConvProb == 0 && pre != 0 {
				t.Errorf("%d conversion events before first exposure, want 0", pre)
			}
			if late == 0 {
				t.Error("no metric events after the window of a non-converting unit")
			}
		})
	}
}

func TestGenerateOrder(t *testing.T) {
	// 10,000 units make ceil(10000/4096) = 3 unit blocks.
	tests := []struct {
		name         string
		shuffle      int
		maxDescents  int // most allowed places where ts goes down
		minDescents  int
		sortedBlocks bool
	}{
		// Rows are sorted within a unit block, so ts can only go down where
		// one block ends and the next begins: 3 blocks, at most 2 descents.
		{"unshuffled", 0, 2, 0, true},
		// Shuffling runs of 500 rows puts about half of each run out of
		// order (a random permutation has (n-1)/2 descents on average); at
		// least 1000 is a loose floor for ~60,000 rows.
		{"shuffled", 500, math.MaxInt, 1000, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := DemoConfig()
			cfg.Users, cfg.NeverExposedUsers, cfg.ShuffleBlock = 10000, 0, tt.shuffle
			rows := collect(t, cfg, 11)
			descents := 0
			for i := 1; i < len(rows); i++ {
				if rows[i].TS.Before(rows[i-1].TS) {
					descents++
				}
			}
			if descents > tt.maxDescents || descents < tt.minDescents {
				t.Errorf("%d descents in %d rows, want [%d, %d]", descents, len(rows), tt.minDescents, tt.maxDescents)
			}
		})
	}
}

func TestGenerateTally(t *testing.T) {
	// 200,000 units in 3 equal arms with 2% multi-arm units leave about
	// 200000 × 0.98 / 3 ≈ 65,300 single-arm units per arm. At p = 0.10 one
	// standard error is sqrt(0.1 × 0.9 / 65300) ≈ 0.00117, so 4 SE ≈ 0.0047;
	// at p = 0.04 it is sqrt(0.04 × 0.96 / 65300) ≈ 0.00077, 4 SE ≈ 0.0031.
	// The test computes the SE from each arm's own count.
	cfg := DemoConfig()
	cfg.Users = 200000
	cfg.NeverExposedUsers = 1000
	cfg.NoiseEventsPerUser = 0.5 // keep it fast; noise does not affect the tally
	cfg.CrossArmProb = 0.02
	cfg.PreExposureConvProb = 0.1

	// A compact per-unit tally: rows of a unit may be far apart, so keep
	// each unit's exposures and metric events until the end.
	type state struct {
		t0    int64
		arm   string
		multi bool
		conv  [][2]int64 // (metric index, ts µs)
	}
	units := make(map[string]*state, cfg.Users+cfg.NeverExposedUsers)
	metricIndex := map[string]int{}
	for i, m := range cfg.Metrics {
		metricIndex[m.Event] = i
	}
	sum, err := generate(cfg, rand.NewPCG(2026, 7), func(e Event) error {
		u := units[e.User]
		if u == nil {
			u = &state{t0: math.MaxInt64}
			units[e.User] = u
		}
		ts := e.TS.UnixMicro()
		if e.Name == cfg.ExposureEvent {
			if u.arm != "" && e.Arm != u.arm {
				u.multi = true
			}
			if ts < u.t0 {
				u.t0 = ts
				u.arm = e.Arm
			}
		} else if m, ok := metricIndex[e.Name]; ok {
			u.conv = append(u.conv, [2]int64{int64(m), ts})
		}
		return nil
	})
	if err != nil {
		t.Fatalf("generate: %v", err)
	}

	armIndex := map[string]int{}
	for i, a := range cfg.Arms {
		armIndex[a.Name] = i
	}
	n := make([]int64, len(cfg.Arms))
	conv := make([][]int64, len(cfg.Arms))
	for i := range conv {
		conv[i] = make([]int64, len(cfg.Metrics))
	}
	var multi, never int64
	for _, u := range units {
		switch {
		case u.arm == "":
			never++
			continue
		case u.multi:
			multi++
			continue
		}
		a := armIndex[u.arm]
		n[a]++
		hit := make([]bool, len(cfg.Metrics))
		for _, c := range u.conv {
			w := int64(cfg.Metrics[c[0]].Window / time.Microsecond)
			if c[1] >= u.t0 && c[1] < u.t0+w {
				hit[c[0]] = true
			}
		}
		for m, h := range hit {
			if h {
				conv[a][m]++
			}
		}
	}

	// The generator's own counts must match the independent tally exactly.
	if never != int64(cfg.NeverExposedUsers) || sum.NeverExposedUnits != never {
		t.Errorf("never exposed: tally %d, summary %d, want %d", never, sum.NeverExposedUnits, cfg.NeverExposedUsers)
	}
	if multi != sum.MultiArmUnits {
		t.Errorf("multi-arm units: tally %d, summary %d", multi, sum.MultiArmUnits)
	}
	if !slices.Equal(n, sum.SingleArmUnits) {
		t.Errorf("single-arm units: tally %v, summary %v", n, sum.SingleArmUnits)
	}
	for a := range cfg.Arms {
		if !slices.Equal(conv[a], sum.Converted[a]) {
			t.Errorf("arm %q converted: tally %v, summary %v", cfg.Arms[a].Name, conv[a], sum.Converted[a])
		}
	}
	// Multi-arm share: 2% of 200,000 = 4,000 expected, SD sqrt(200000 ×
	// 0.02 × 0.98) ≈ 63, so 4 SD ≈ 250.
	if math.Abs(float64(multi)-4000) > 250 {
		t.Errorf("multi-arm units %d, want 4000 ± 250", multi)
	}

	for a, arm := range cfg.Arms {
		for m, metric := range cfg.Metrics {
			p := arm.Rates[m]
			got := float64(conv[a][m]) / float64(n[a])
			se := math.Sqrt(p * (1 - p) / float64(n[a]))
			if math.Abs(got-p) > 4*se {
				t.Errorf("arm %q metric %q: observed rate %.5f (%d/%d), true %.3f, more than 4 SE (%.5f) away",
					arm.Name, metric.Event, got, conv[a][m], n[a], p, 4*se)
			}
		}
	}
}

func TestGenerateEmitError(t *testing.T) {
	stop := errors.New("disk full")
	calls := 0
	err := Generate(DemoConfig(), rand.NewPCG(1, 1), func(Event) error {
		calls++
		if calls == 3 {
			return stop
		}
		return nil
	})
	if !errors.Is(err, stop) {
		t.Fatalf("Generate: %v, want it to wrap %v", err, stop)
	}
	if calls != 3 {
		t.Errorf("emit called %d times, want 3 (stop at the first error)", calls)
	}
}

func TestGenerateBadInput(t *testing.T) {
	tests := []struct {
		name string
		cfg  Config
		src  rand.Source
	}{
		{"nil source", DemoConfig(), nil},
		{"invalid config", Config{}, rand.NewPCG(1, 1)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			called := false
			err := Generate(tt.cfg, tt.src, func(Event) error { called = true; return nil })
			if !errors.Is(err, ErrInvalidConfig) {
				t.Errorf("Generate: %v, want ErrInvalidConfig", err)
			}
			if called {
				t.Error("emit was called")
			}
		})
	}
}

func TestGenerateMemoryBounded(t *testing.T) {
	if testing.Short() {
		t.Skip("generates 300,000 units")
	}
	// 300,000 units at about 6 rows each are ~1.8M rows; kept in memory as
	// Events (about 100 bytes each with their strings) they would take
	// ~180 MB. The generator holds one block of 4096 units (~25,000 rows,
	// a few MB), so the live heap must stay far below that. 16 MB leaves
	// room for the test binary and GC lag.
	const limit = 16 << 20
	cfg := DemoConfig()
	cfg.Users = 300000
	cfg.ShuffleBlock = 1000 // exercise the shuffle buffer too
	var ms runtime.MemStats
	var peak uint64
	rows := 0
	err := Generate(cfg, rand.NewPCG(5, 5), func(Event) error {
		rows++
		if rows%200000 == 0 {
			runtime.GC()
			runtime.ReadMemStats(&ms)
			peak = max(peak, ms.HeapAlloc)
		}
		return nil
	})
	if err != nil {
		t.Fatalf("Generate: %v", err)
	}
	if rows < 1500000 {
		t.Fatalf("%d rows, want at least 1.5M for the check to mean anything", rows)
	}
	if peak > limit {
		t.Errorf("peak live heap %d MB, want below %d MB", peak>>20, limit>>20)
	}
	t.Logf("%d rows, peak live heap %.1f MB", rows, float64(peak)/(1<<20))
}
