package experiment

import (
	"bytes"
	"errors"
	"fmt"
	"math/rand/v2"
	"reflect"
	"slices"
	"sort"
	"testing"
	"time"
)

// stateSpec is the spec of the resumed-tally tests: two metrics sharing an
// event, a segment dimension, a window that ends before the last day.
func stateSpec(policy MultiArmPolicy) Spec {
	return Spec{
		Key:           "exp",
		ExposureEvent: "seen",
		Control:       "control",
		Arms:          []string{"control", "treat"},
		Start:         ptrTime(base.Add(day)),
		End:           ptrTime(base.Add(10 * day)),
		Metrics: []Metric{{Name: "buy", Events: []string{"buy"}, Window: 36 * hour},
			{Name: "engaged", Events: []string{"cart", "buy"}, Window: 3 * day}},
		MultiArm: policy,
		Segments: []string{"country"},
	}
}

// randomDays returns rows of days 0 to n-1, in time order within a day,
// of a small population: exposures in two arms (and another experiment's),
// metric and other events, a few units exposed to both arms.
func randomDays(seed uint64, n int) [][]row {
	rng := rand.New(rand.NewPCG(seed, 3))
	days := make([][]row, n)
	for d := range days {
		for k := 0; k < 60; k++ {
			u := fmt.Sprintf("u%02d", rng.IntN(40))
			at := time.Duration(d)*day + time.Duration(rng.IntN(int(day/time.Minute)))*time.Minute
			var r row
			switch x := rng.IntN(10); {
			case x < 3:
				arm := []string{"control", "treat"}[int(u[2]-'0')%2]
				if rng.IntN(15) == 0 {
					arm = "treat" // a second arm for some units
				}
				r = seen(u, at, arm)
				r.segs = []string{[]string{"DE", "FR", nullSeg}[rng.IntN(3)]}
			case x < 4:
				r = row{user: u, at: at, event: "seen", exp: "other", arm: "a"}
			case x < 6:
				r = ev(u, at, "buy")
			case x < 8:
				r = ev(u, at, "cart")
			default:
				r = ev(u, at, "view")
			}
			days[d] = append(days[d], r)
		}
		sort.SliceStable(days[d], func(i, j int) bool { return days[d][i].at < days[d][j].at })
	}
	return days
}

// resume tallies rows on top of a saved state (none when state is nil) and
// returns the tally, the unit records and the new state, or the error of
// Tally.
func resume(t *testing.T, spec Spec, state []byte, rows []row, parts int) (Tally, []UnitRecord, []byte, error) {
	t.Helper()
	return resumeHash(t, spec, state, rows, parts, nil)
}

// resumeHash is resume with the stable hash of the saved state's order
// replaced by hash (nil: the default).
func resumeHash(t *testing.T, spec Spec, state []byte, rows []row, parts int, hash func([]byte) uint64) (Tally, []UnitRecord, []byte, error) {
	t.Helper()
	tl, err := newTallier(spec, parts)
	if err != nil {
		t.Fatal(err)
	}
	if hash != nil {
		tl.stateHash = hash
	}
	if state != nil {
		if err := tl.ReadState(state); err != nil {
			t.Fatalf("ReadState: %v", err)
		}
	}
	if len(rows) > 0 {
		rec := batch(t, rows, spec.Segments...)
		err = tl.Add(rec)
		rec.Release()
		if err != nil {
			t.Fatal(err)
		}
	}
	out, err := tl.Tally()
	if err != nil {
		return Tally{}, nil, nil, err
	}
	seq, err := tl.Units()
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := tl.WriteState(&buf); err != nil {
		t.Fatalf("WriteState: %v", err)
	}
	return out, slices.Collect(seq), buf.Bytes(), nil
}

// Adding the days one at a time on top of the saved state gives the tally
// and unit records of all the days at once (common practice: an
// incremental aggregate must equal the batch one), for both multi-arm
// policies, both maturity policies, a closed and an open window, a rerun
// look (as-of) and any number of partitions; days in time order never
// need a recompute.
func TestResumedTallyEqualsFull(t *testing.T) {
	asOf := base.Add(6*day + 5*hour)
	for v, policy := range []MultiArmPolicy{MultiArmExclude, MultiArmFirst, MultiArmExclude, MultiArmFirst} {
		for seed := uint64(1); seed <= 8; seed++ {
			spec := stateSpec(policy)
			if v >= 2 {
				// The other maturity policy, an open window and a
				// rerun look.
				spec.Maturity, spec.End, spec.AsOf = MaturityInclude, nil, &asOf
			}
			days := randomDays(seed, 12)
			var state []byte
			var all []row
			for d, rows := range days {
				all = append(all, rows...)
				want, wantUnits, _, err := resume(t, spec, nil, all, 1)
				if err != nil {
					t.Fatal(err)
				}
				parts := 1 + d%4
				got, gotUnits, next, err := resume(t, spec, state, rows, parts)
				if err != nil {
					t.Fatalf("policy %v, seed %d, day %d: %v", policy, seed, d, err)
				}
				if !reflect.DeepEqual(got, want) {
					t.Fatalf("policy %v, seed %d, day %d: resumed tally\n%+v\nfull\n%+v", policy, seed, d, got, want)
				}
				if !reflect.DeepEqual(gotUnits, wantUnits) {
					t.Fatalf("policy %v, seed %d, day %d: unit records differ", policy, seed, d)
				}
				state = next
			}
		}
	}
}

// Rows the state cannot absorb give a *StaleStateError, never a wrong
// tally; a late day that happens to be absorbable gives the full tally.
func TestResumedTallyStale(t *testing.T) {
	spec := stateSpec(MultiArmExclude)
	first := []row{seen("a", 2*day, "control"), ev("a", 2*day+hour, "buy"), ev("b", 2*day, "buy"),
		seen("c", 3*day, "treat")}
	_, _, state, err := resume(t, spec, nil, first, 2)
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name  string
		rows  []row
		stale bool
	}{
		{"later rows", []row{seen("a", 4*day, "control"), ev("a", 4*day, "buy"), seen("d", 4*day, "treat")}, false},
		{"second arm later", []row{seen("a", 4*day, "treat")}, false},
		{"exposed after its events", []row{seen("b", 2*day+time.Minute, "treat")}, false},
		{"earlier exposure", []row{seen("a", 2*day-time.Minute, "control")}, true},
		{"tie at t0", []row{seen("c", 3*day, "control")}, true},
		{"exposed before its events", []row{seen("b", 2*day-time.Minute, "treat")}, true},
		{"exposed at its event", []row{seen("b", 2*day, "treat")}, true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			want, _, _, err := resume(t, spec, nil, append(slices.Clone(first), tc.rows...), 1)
			if err != nil {
				t.Fatal(err)
			}
			got, _, _, err := resume(t, spec, state, tc.rows, 3)
			var se *StaleStateError
			if errors.As(err, &se) != tc.stale {
				t.Fatalf("error %v, want stale %v", err, tc.stale)
			}
			if err == nil && !reflect.DeepEqual(got, want) {
				t.Fatalf("resumed tally\n%+v\nfull\n%+v", got, want)
			}
		})
	}
}

func TestReadStateDamaged(t *testing.T) {
	spec := stateSpec(MultiArmFirst)
	_, _, state, err := resume(t, spec, nil, randomDays(1, 3)[1], 2)
	if err != nil {
		t.Fatal(err)
	}
	for _, cut := range []int{0, 1, len(state) / 2, len(state) - 1} {
		tl, _ := newTallier(spec, 2)
		if err := tl.ReadState(state[:cut]); !errors.Is(err, ErrStateFormat) {
			t.Errorf("cut at %d: error %v, want ErrStateFormat", cut, err)
		}
	}
	other := spec
	other.Metrics = other.Metrics[:1]
	tl, _ := newTallier(other, 2)
	if err := tl.ReadState(state); !errors.Is(err, ErrStateFormat) {
		t.Errorf("other metrics: error %v, want ErrStateFormat", err)
	}
}

// Units whose keys share a stable hash (a hash that collides on purpose:
// the key's length, or the last byte of the key with every bit but the
// top ones equal) are ordered by their key bytes and stay exact, as does
// a state spread over many blocks whose number grows as units arrive.
func TestResumedTallyHashCollisions(t *testing.T) {
	hashes := map[string]func([]byte) uint64{
		"length":    func(k []byte) uint64 { return uint64(len(k)) << 60 },
		"last byte": func(k []byte) uint64 { return uint64(k[len(k)-1]) << 56 },
		"constant":  func([]byte) uint64 { return 42 },
	}
	for name, h := range hashes {
		t.Run(name, func(t *testing.T) {
			spec := stateSpec(MultiArmExclude)
			var state []byte
			var all []row
			for d, rows := range randomDays(3, 8) {
				all = append(all, rows...)
				want, wantUnits, _, err := resume(t, spec, nil, all, 1)
				if err != nil {
					t.Fatal(err)
				}
				got, gotUnits, next, err := resumeHash(t, spec, state, rows, 1+d%3, h)
				if err != nil {
					t.Fatalf("day %d: %v", d, err)
				}
				if !reflect.DeepEqual(got, want) || !reflect.DeepEqual(gotUnits, wantUnits) {
					t.Fatalf("day %d: the resumed tally differs from the full one", d)
				}
				state = next
			}
		})
	}
}

// manyUnitDays returns n days of rows of about 12,000 units each, enough
// for a state of several blocks (blockBits) by the last day: most units
// are new each day, some come back with a purchase or a second arm.
func manyUnitDays(n int) [][]row {
	rng := rand.New(rand.NewPCG(7, 7))
	days := make([][]row, n)
	for d := range days {
		for k := 0; k < 12000; k++ {
			u := fmt.Sprintf("user-%d", rng.IntN(30000))
			at := time.Duration(d)*day + time.Duration(rng.IntN(int(day/time.Second)))*time.Second
			switch x := rng.IntN(10); {
			case x < 6:
				r := seen(u, at, []string{"control", "treat"}[rng.IntN(2)])
				r.segs = []string{[]string{"DE", "FR", nullSeg}[rng.IntN(3)]}
				days[d] = append(days[d], r)
			case x < 8:
				days[d] = append(days[d], ev(u, at, "buy"))
			default:
				days[d] = append(days[d], ev(u, at, "cart"))
			}
		}
		sort.SliceStable(days[d], func(i, j int) bool { return days[d][i].at < days[d][j].at })
	}
	return days
}

// A state of many blocks, resumed day by day, keeps the full tally
// (common practice: an incremental aggregate must equal the batch one);
// its number of blocks grows with its units.
func TestResumedTallyManyBlocks(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: 36,000 rows a day")
	}
	for _, policy := range []MultiArmPolicy{MultiArmExclude, MultiArmFirst} {
		spec := stateSpec(policy)
		var state []byte
		var all []row
		for d, rows := range manyUnitDays(4) {
			all = append(all, rows...)
			want, _, _, err := resume(t, spec, nil, all, 2)
			if err != nil {
				t.Fatal(err)
			}
			got, _, next, err := resume(t, spec, state, rows, 2)
			if err != nil { // days in time order are never stale
				t.Fatalf("policy %v, day %d: %v", policy, d, err)
			}
			if !reflect.DeepEqual(got, want) {
				t.Fatalf("policy %v, day %d: the resumed tally differs from the full one", policy, d)
			}
			state = next
		}
		tl, _ := newTallier(spec, 2)
		if err := tl.ReadState(state); err != nil {
			t.Fatal(err)
		}
		if tl.saved.bits == 0 {
			t.Errorf("policy %v: %d units in one block, want several", policy, tl.saved.units)
		}
	}
}

// A damaged block is found when the tally is made; a damaged header, a
// cut file, another layout version and another hash order when the state
// is read or merged: each is an ErrStateFormat, never a wrong tally.
func TestStateDamagedBlocks(t *testing.T) {
	spec := stateSpec(MultiArmFirst)
	_, _, state, err := resume(t, spec, nil, randomDays(1, 3)[1], 2)
	if err != nil {
		t.Fatal(err)
	}
	tally := func(b []byte, hash func([]byte) uint64) error {
		tl, _ := newTallier(spec, 2)
		if hash != nil {
			tl.stateHash = hash
		}
		if err := tl.ReadState(b); err != nil {
			return err
		}
		_, err := tl.Tally()
		return err
	}
	// The blocks end just before the closing magic (and its length byte).
	end := len(state) - len(stateMagic) - 1
	for _, at := range []int{20, 40, end - 1, end - 10} {
		b := slices.Clone(state)
		b[at] ^= 0x10
		if err := tally(b, nil); !errors.Is(err, ErrStateFormat) {
			t.Errorf("byte %d of %d flipped: error %v, want ErrStateFormat", at, len(b), err)
		}
	}
	old := slices.Clone(state)
	old[len(stateMagic)+1] = 1 // the layout version, after the magic's length and bytes
	if err := tally(old, nil); !errors.Is(err, ErrStateFormat) {
		t.Errorf("version 1: error %v, want ErrStateFormat", err)
	}
	// A block the new rows touch is checked for the order of its hashes.
	if _, _, _, err := resumeHash(t, spec, state, randomDays(1, 3)[2], 2, func(k []byte) uint64 { return uint64(len(k)) }); !errors.Is(err, ErrStateFormat) {
		t.Errorf("another hash order: error %v, want ErrStateFormat", err)
	}
	if err := tally(state, nil); err != nil {
		t.Errorf("the undamaged state: %v", err)
	}
}

// A segment dimension whose saved and new values together pass its limit
// is left to a full run (which judges the limit on all the rows); at the
// limit, the resumed tally is the full one.
func TestResumedTallySegmentLimit(t *testing.T) {
	spec := stateSpec(MultiArmExclude)
	spec.MaxSegmentValues = 2
	withSeg := func(r row, v string) row {
		r.segs = []string{v}
		return r
	}
	first := []row{withSeg(seen("a", 2*day, "control"), "DE")}
	_, _, state, err := resume(t, spec, nil, first, 2)
	if err != nil {
		t.Fatal(err)
	}
	atLimit := []row{withSeg(seen("b", 3*day, "treat"), "FR")}
	want, _, _, err := resume(t, spec, nil, append(slices.Clone(first), atLimit...), 1)
	if err != nil {
		t.Fatal(err)
	}
	got, _, next, err := resume(t, spec, state, atLimit, 2)
	if err != nil || !reflect.DeepEqual(got, want) {
		t.Fatalf("at the limit: error %v, or the resumed tally differs from the full one", err)
	}
	_, _, _, err = resume(t, spec, next, []row{withSeg(seen("c", 4*day, "treat"), "IT")}, 2)
	var se *StaleStateError
	if !errors.As(err, &se) {
		t.Fatalf("past the limit: error %v, want a *StaleStateError", err)
	}
}

// ExpectGrowth sizes a resumed tally's unit indexes once, large enough for
// a day like the saved ones, and changes nothing else: the tally, the unit
// records and the new state are those of a run without it (common
// practice: a capacity hint must not change a result).
func TestResumedTallyExpectGrowth(t *testing.T) {
	spec := stateSpec(MultiArmExclude)
	days := manyUnitDays(3)
	_, _, state, err := resume(t, spec, nil, slices.Concat(days[0], days[1]), 2)
	if err != nil {
		t.Fatal(err)
	}
	want, wantUnits, wantState, err := resume(t, spec, state, days[2], 2)
	if err != nil {
		t.Fatal(err)
	}
	tl, _ := newTallier(spec, 2)
	if err := tl.ReadState(state); err != nil {
		t.Fatal(err)
	}
	tl.ExpectGrowth(0.5) // one day on top of two
	sized, arena := len(tl.parts[0].units.slots), keySlabBytes(&tl.parts[0].units)
	if sized <= unitIndexMinSlots || arena == 0 {
		t.Fatalf("ExpectGrowth left %d slots and %d bytes of arena", sized, arena)
	}
	rec := batch(t, days[2], spec.Segments...)
	err = tl.Add(rec)
	rec.Release()
	if err != nil {
		t.Fatal(err)
	}
	if n, a := len(tl.parts[0].units.slots), keySlabBytes(&tl.parts[0].units); n != sized || a != arena {
		t.Errorf("the unit index grew from %d to %d slots and %d to %d bytes of arena after ExpectGrowth", sized, n, arena, a)
	}
	got, err := tl.Tally()
	if err != nil {
		t.Fatal(err)
	}
	seq, err := tl.Units()
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := tl.WriteState(&buf); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, want) || !reflect.DeepEqual(slices.Collect(seq), wantUnits) || !bytes.Equal(buf.Bytes(), wantState) {
		t.Error("ExpectGrowth changed the tally, the unit records or the state")
	}
}

// keySlabBytes returns the bytes of keys x's slabs hold room for.
func keySlabBytes(x *unitIndex) int {
	n := 0
	for _, s := range x.slabs {
		n += len(s)
	}
	return n
}

// SetReadShare only sizes the unit indexes ahead: a tally told the share
// of its input read, right, wrong or absent, gives the tally, the unit
// records and the state of one told nothing (common practice: a capacity
// hint must not change a result). The units are enough for the indexes to
// grow by projection (TestUnitIndexGrowsByProjection).
func TestReadShareLeavesTallyAlone(t *testing.T) {
	spec := stateSpec(MultiArmExclude)
	rng := rand.New(rand.NewPCG(5, 9))
	const units, batches = 150_000, 30
	var rows []row
	for i := range units {
		u := fmt.Sprintf("user-%d", i)
		at := day + time.Duration(rng.IntN(int(8*day/time.Second)))*time.Second
		r := seen(u, at, []string{"control", "treat"}[rng.IntN(2)])
		r.segs = []string{"DE"}
		rows = append(rows, r)
		if rng.IntN(3) == 0 {
			rows = append(rows, ev(u, at+time.Hour, "buy"))
		}
	}
	type result struct {
		tally Tally
		units []UnitRecord
		state []byte
		slots int
	}
	run := func(share func(b int) float64) result {
		tl, err := newTallier(spec, 1)
		if err != nil {
			t.Fatal(err)
		}
		per := len(rows)/batches + 1
		for b := 0; b*per < len(rows); b++ {
			if share != nil {
				tl.SetReadShare(share(b))
			}
			rec := batch(t, rows[b*per:min(len(rows), (b+1)*per)], spec.Segments...)
			err := tl.Add(rec)
			rec.Release()
			if err != nil {
				t.Fatal(err)
			}
		}
		var res result
		res.slots = len(tl.parts[0].units.slots)
		if res.tally, err = tl.Tally(); err != nil {
			t.Fatal(err)
		}
		seq, err := tl.Units()
		if err != nil {
			t.Fatal(err)
		}
		res.units = slices.Collect(seq)
		var buf bytes.Buffer
		if err := tl.WriteState(&buf); err != nil {
			t.Fatal(err)
		}
		res.state = buf.Bytes()
		return res
	}
	want := run(nil)
	for name, share := range map[string]func(int) float64{
		"right":    func(b int) float64 { return float64(b+1) / batches },
		"too-low":  func(b int) float64 { return 0.1 * float64(b+1) / batches },
		"too-high": func(b int) float64 { return min(1, 10*float64(b+1)/batches) },
		"off":      func(int) float64 { return -1 },
	} {
		got := run(share)
		if !reflect.DeepEqual(got.tally, want.tally) || !reflect.DeepEqual(got.units, want.units) || !bytes.Equal(got.state, want.state) {
			t.Errorf("share %s changed the tally, the unit records or the state", name)
		}
		if name == "too-low" && got.slots <= want.slots {
			t.Errorf("share %s: %d slots, want more than %d (the projection unused)", name, got.slots, want.slots)
		}
	}
}
