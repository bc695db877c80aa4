package sampledata

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"
	"time"
)

// Event is one row of a generated event log.
type Event struct {
	// User is the unit id, "u" and a zero-padded number of fixed width.
	User string
	// TS is the event time in UTC, a whole number of microseconds.
	TS time.Time
	// Name is the event name.
	Name string
	// Experiment is the experiment key on exposure rows and "" elsewhere
	// (written as null).
	Experiment string
	// Arm is the arm name on exposure rows and "" elsewhere (written as
	// null).
	Arm string
	// Platform is the unit's platform, the same on every row of the unit.
	Platform string
}

// Summary describes what a generator produced. Slices indexed by arm follow
// Config.Arms; slices indexed by metric follow Config.Metrics.
type Summary struct {
	// Rows is the number of rows emitted.
	Rows int64
	// ExposureRows is the number of exposure rows, repeats included.
	ExposureRows int64
	// Units is the number of exposed units (Config.Users).
	Units int64
	// NeverExposedUnits is the number of units with events but no exposure.
	NeverExposedUnits int64
	// UnitsPerArm counts exposed units by the arm of their first exposure,
	// multi-arm units included.
	UnitsPerArm []int64
	// MultiArmUnits counts units with an exposure in a second arm.
	MultiArmUnits int64
	// SingleArmUnits counts, per arm, the units exposed to that arm only:
	// the population of an analysis that excludes multi-arm units.
	SingleArmUnits []int64
	// Converted counts, per arm and metric ([arm][metric]), the single-arm
	// units with at least one metric event in [t0, t0+Window).
	Converted [][]int64
	// MinTS and MaxTS are the earliest and latest event times emitted.
	MinTS, MaxTS time.Time
}

// Shape of the generated behaviour that Config does not expose.
const (
	// unitBlock is the number of units generated, sorted and emitted together.
	unitBlock = 4096
	// secondConvProb is the chance that a converting unit converts again
	// (after its first conversion, maybe after the window).
	secondConvProb = 0.25
	// lateConvProb is the chance that a unit that does not convert within
	// the window has a metric event in [t0+Window, t0+2*Window).
	lateConvProb = 0.2
	// preNoiseShare is the share of noise events placed before t0.
	preNoiseShare = 0.3
	// neverExposedConvProb is the chance that a never-exposed unit has a
	// metric event.
	neverExposedConvProb = 0.3

	microsPerDay = int64(24 * time.Hour / time.Microsecond)
	// preSpan bounds how long before t0 pre-exposure events fall.
	preSpan = 7 * microsPerDay
	// followSpan bounds how long after t0 repeat and second-arm exposures
	// fall (also bounded by the longest window, so that they fall before
	// Config.AnalysisEnd).
	followSpan = 3 * microsPerDay
	// noiseTail is how far past the longest window noise events may fall.
	noiseTail = 2 * microsPerDay
	// minIDDigits is the smallest width of the number in a user id.
	minIDDigits = 7
)

// Generate produces the event log described by cfg, drawing every random
// number from src, and passes each row to emit in order. It stops at emit's
// first error and returns it wrapped.
//
// Units are generated a block at a time; rows are sorted by time within a
// block and then shuffled in runs of cfg.ShuffleBlock rows when that is
// positive. Memory is bounded by the block and the shuffle buffer, not by
// cfg.Users. The Event passed to emit is a value; emit may keep it.
//
// The same cfg and a source in the same state give the same rows. src is
// advanced and must not be used concurrently.
func Generate(cfg Config, src rand.Source, emit func(Event) error) error {
	_, err := generate(cfg, src, emit)
	return err
}

// generate is Generate that also returns the Summary.
func generate(cfg Config, src rand.Source, emit func(Event) error) (Summary, error) {
	if err := Validate(cfg); err != nil {
		return Summary{}, err
	}
	if src == nil {
		return Summary{}, fmt.Errorf("%w: nil random source", ErrInvalidConfig)
	}
	g := newGenerator(cfg, src, emit)
	if err := g.run(); err != nil {
		return Summary{}, err
	}
	return g.sum, nil
}

// row is a generated row before it becomes an Event.
type row struct {
	us   int64  // microseconds since the Unix epoch
	user string // unit id
	name string // event name
	arm  int    // arm index on exposure rows, -1 elsewhere
	plat int    // platform index
}

func compareRows(a, b row) int {
	return cmp.Or(
		cmp.Compare(a.us, b.us),
		strings.Compare(a.user, b.user),
		strings.Compare(a.name, b.name),
		cmp.Compare(a.arm, b.arm),
	)
}

type generator struct {
	cfg  Config
	r    *rand.Rand
	emit func(Event) error

	armCum   []float64 // cumulative normalised arm shares
	platCum  []float64 // cumulative normalised platform shares
	windows  []int64   // metric windows in microseconds
	start    int64     // Start in microseconds
	span     int64     // ExposureDays in microseconds
	noiseEnd int64     // longest window + noiseTail, in microseconds
	follow   int64     // min(followSpan, longest window), in microseconds
	digits   int       // width of the number in a user id

	block   []row   // rows of the current unit block
	shuffle []Event // rows waiting to be shuffled
	sum     Summary
}

func newGenerator(cfg Config, src rand.Source, emit func(Event) error) *generator {
	g := &generator{
		cfg:     cfg,
		r:       rand.New(src),
		emit:    emit,
		armCum:  cumulative(len(cfg.Arms), func(i int) float64 { return cfg.Arms[i].Share }),
		platCum: cumulative(len(cfg.Platforms), func(i int) float64 { return cfg.Platforms[i].Share }),
		start:   cfg.Start.UnixMicro(),
		span:    int64(cfg.ExposureDays) * microsPerDay,
		digits:  max(minIDDigits, len(strconv.Itoa(cfg.Users+cfg.NeverExposedUsers))),
	}
	var longest int64
	for _, m := range cfg.Metrics {
		w := int64(m.Window / time.Microsecond) // exact: Validate wants whole microseconds
		g.windows = append(g.windows, w)
		longest = max(longest, w)
	}
	g.noiseEnd = longest + noiseTail
	g.follow = min(followSpan, longest)
	if cfg.ShuffleBlock > 0 {
		g.shuffle = make([]Event, 0, cfg.ShuffleBlock)
	}
	g.sum.UnitsPerArm = make([]int64, len(cfg.Arms))
	g.sum.SingleArmUnits = make([]int64, len(cfg.Arms))
	g.sum.Converted = make([][]int64, len(cfg.Arms))
	for i := range g.sum.Converted {
		g.sum.Converted[i] = make([]int64, len(cfg.Metrics))
	}
	return g
}

// cumulative returns the running sums of n weights divided by their total,
// with the last entry exactly 1.
func cumulative(n int, weight func(int) float64) []float64 {
	out := make([]float64, n)
	var total float64
	for i := range n {
		total += weight(i)
	}
	var run float64
	for i := range n {
		run += weight(i)
		out[i] = run / total
	}
	out[n-1] = 1
	return out
}

// pick draws an index from cumulative shares.
func (g *generator) pick(cum []float64) int {
	u := g.r.Float64()
	for i, c := range cum {
		if u < c {
			return i
		}
	}
	return len(cum) - 1
}

// chance reports true with probability p.
func (g *generator) chance(p float64) bool { return g.r.Float64() < p }

// noiseCount draws a count with mean NoiseEventsPerUser:
// floor(2·m·U1 + U2) has mean 2·m/2 = m for independent uniforms U1, U2,
// since E[floor(x + U2)] = x.
func (g *generator) noiseCount() int {
	m := g.cfg.NoiseEventsPerUser
	if m == 0 {
		return 0
	}
	return int(math.Floor(2*m*g.r.Float64() + g.r.Float64()))
}

func (g *generator) userID(n int) string {
	s := strconv.Itoa(n)
	return "u" + strings.Repeat("0", g.digits-len(s)) + s
}

func (g *generator) run() error {
	cfg := g.cfg
	total := cfg.Users + cfg.NeverExposedUsers
	for first := 0; first < total; first += unitBlock {
		last := min(first+unitBlock, total)
		g.block = g.block[:0]
		for k := first; k < last; k++ {
			if k < cfg.Users {
				g.exposedUnit(g.userID(k + 1))
			} else {
				g.neverExposedUnit(g.userID(k + 1))
			}
		}
		if err := g.flushBlock(); err != nil {
			return err
		}
	}
	return g.flushShuffle()
}

func (g *generator) add(us int64, user, name string, arm, plat int) {
	g.block = append(g.block, row{us: us, user: user, name: name, arm: arm, plat: plat})
}

// exposedUnit generates the rows of one exposed unit.
func (g *generator) exposedUnit(user string) {
	cfg := g.cfg
	plat := g.pick(g.platCum)
	t0 := g.start + g.r.Int64N(g.span)
	arm := g.pick(g.armCum)
	g.sum.Units++
	g.sum.UnitsPerArm[arm]++

	g.add(t0, user, cfg.ExposureEvent, arm, plat)
	if g.chance(cfg.RepeatExposureProb) {
		g.add(t0+1+g.r.Int64N(g.follow), user, cfg.ExposureEvent, arm, plat)
	}
	multi := g.chance(cfg.CrossArmProb)
	if multi {
		other := g.r.IntN(len(cfg.Arms) - 1)
		if other >= arm {
			other++
		}
		g.add(t0+1+g.r.Int64N(g.follow), user, cfg.ExposureEvent, other, plat)
		g.sum.MultiArmUnits++
	} else {
		g.sum.SingleArmUnits[arm]++
	}

	for m, metric := range cfg.Metrics {
		w := g.windows[m]
		if g.chance(cfg.Arms[arm].Rates[m]) {
			// Converts: first event inside [t0, t0+w).
			d := g.r.Int64N(w)
			g.add(t0+d, user, metric.Event, -1, plat)
			if g.chance(secondConvProb) {
				g.add(t0+d+1+g.r.Int64N(w), user, metric.Event, -1, plat)
			}
			if !multi {
				g.sum.Converted[arm][m]++
			}
		} else if g.chance(lateConvProb) {
			// Does not convert: any metric event is at or after t0+w.
			g.add(t0+w+g.r.Int64N(w), user, metric.Event, -1, plat)
		}
	}
	if g.chance(cfg.PreExposureConvProb) {
		m := g.r.IntN(len(cfg.Metrics))
		g.add(t0-1-g.r.Int64N(preSpan), user, cfg.Metrics[m].Event, -1, plat)
	}
	for range g.noiseCount() {
		name := cfg.NoiseEvents[g.r.IntN(len(cfg.NoiseEvents))]
		var ts int64
		if g.chance(preNoiseShare) {
			ts = t0 - 1 - g.r.Int64N(preSpan)
		} else {
			ts = t0 + g.r.Int64N(g.noiseEnd)
		}
		g.add(ts, user, name, -1, plat)
	}
}

// neverExposedUnit generates the rows of one unit that is never exposed: at
// least one event, around a time in the exposure period.
func (g *generator) neverExposedUnit(user string) {
	cfg := g.cfg
	plat := g.pick(g.platCum)
	t := g.start + g.r.Int64N(g.span)
	g.sum.NeverExposedUnits++
	n := 0
	if len(cfg.NoiseEvents) > 0 {
		n = max(1, g.noiseCount())
	}
	for range n {
		name := cfg.NoiseEvents[g.r.IntN(len(cfg.NoiseEvents))]
		g.add(t+g.r.Int64N(g.noiseEnd), user, name, -1, plat)
	}
	if n == 0 || g.chance(neverExposedConvProb) {
		m := g.r.IntN(len(cfg.Metrics))
		g.add(t+g.r.Int64N(g.windows[m]), user, cfg.Metrics[m].Event, -1, plat)
	}
}

// flushBlock sorts the block's rows by time and passes them on.
func (g *generator) flushBlock() error {
	slices.SortFunc(g.block, compareRows)
	for _, r := range g.block {
		e := Event{
			User:     r.user,
			TS:       time.UnixMicro(r.us).UTC(),
			Name:     r.name,
			Platform: g.cfg.Platforms[r.plat].Name,
		}
		if r.arm >= 0 {
			e.Experiment = g.cfg.Experiment
			e.Arm = g.cfg.Arms[r.arm].Name
		}
		if g.cfg.ShuffleBlock == 0 {
			if err := g.send(e); err != nil {
				return err
			}
			continue
		}
		g.shuffle = append(g.shuffle, e)
		if len(g.shuffle) == g.cfg.ShuffleBlock {
			if err := g.flushShuffle(); err != nil {
				return err
			}
		}
	}
	return nil
}

// flushShuffle shuffles the waiting rows and passes them on.
func (g *generator) flushShuffle() error {
	g.r.Shuffle(len(g.shuffle), func(i, j int) {
		g.shuffle[i], g.shuffle[j] = g.shuffle[j], g.shuffle[i]
	})
	for _, e := range g.shuffle {
		if err := g.send(e); err != nil {
			return err
		}
	}
	clear(g.shuffle)
	g.shuffle = g.shuffle[:0]
	return nil
}

func (g *generator) send(e Event) error {
	if err := g.emit(e); err != nil {
		return fmt.Errorf("emit row %d (user %q): %w", g.sum.Rows+1, e.User, err)
	}
	if g.sum.Rows == 0 || e.TS.Before(g.sum.MinTS) {
		g.sum.MinTS = e.TS
	}
	if g.sum.Rows == 0 || e.TS.After(g.sum.MaxTS) {
		g.sum.MaxTS = e.TS
	}
	g.sum.Rows++
	if e.Arm != "" {
		g.sum.ExposureRows++
	}
	return nil
}
