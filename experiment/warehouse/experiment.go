package warehouse

import (
	"strconv"

	"github.com/armtally/armtally/experiment"
)

// buildExperiment adds the CTEs and result rows of experiment k:
//
//	w_x   its in-window exposure rows
//	w_t   the exposure rows, each with its unit's t0 (a window minimum)
//	w_f   per unit: t0, multi-arm when the window holds several arms;
//	      the rows at t0 give the arm (the smallest name when
//	      they disagree), the segment values (the smallest; MIN skips a
//	      null, so a value beats a null) and the tie flag
//	w_e   per unit with metric events: each event's fate, counted, and
//	      the conversion flag per metric
//	w_a   per exposed unit: status, conversion and maturity per metric
//	w_g, w_n  per arm: earliest exposure; exposed and analysed units
//	w_xc, w_ec, w_uc  the experiment's counters
func (q *Query) buildExperiment(k int) {
	s := q.def.Experiments[k]
	n := strconv.Itoa(k + 1)
	name := func(base string) string { return base + "_" + n }
	expo := strLit(s.ExposureEvent)
	segIdx := q.segmentIndexes(s)

	r := func(c string) expr { return ref{"r", c} }
	x := &selectStmt{items: []item{{x: r("w_user"), as: "w_user"}, {x: r("w_ts"), as: "w_ts"}, {x: r("w_arm"), as: "w_arm"}},
		src: cteRef{"w_rel", "r"}, where: and(eq(r("w_event"), expo), q.keyMatch(s, r("w_key")), timeWindow(s, r("w_ts")))}
	for _, i := range segIdx {
		x.items = append(x.items, item{x: r(segAlias(i)), as: segAlias(i)})
	}
	q.addCTE(name("w_x"), matDefault, x)

	// t0 comes from a window over each unit's rows rather than a join of
	// the rows with their own per-unit minimum: one sort by unit, and no
	// join whose size the engine must guess (PostgreSQL, guessing one
	// row, chose a nested loop that was quadratic in the units).
	xr := func(c string) expr { return ref{"x", c} }
	t := &selectStmt{items: []item{
		{x: xr("w_user"), as: "w_user"},
		{x: xr("w_ts"), as: "w_ts"},
		{x: xr("w_arm"), as: "w_arm"},
		{x: minOver{xr("w_ts"), xr("w_user")}, as: "w_t0"},
	}, src: cteRef{name("w_x"), "x"}}
	for _, i := range segIdx {
		t.items = append(t.items, item{x: xr(segAlias(i)), as: segAlias(i)})
	}
	q.addCTE(name("w_t"), matDefault, t)

	tr := func(c string) expr { return ref{"t", c} }
	atT0 := func(x expr) expr { return caseWhen{whens: []when{{eq(tr("w_ts"), tr("w_t0")), x}}} }
	f := &selectStmt{items: []item{
		{x: tr("w_user"), as: "w_user"},
		{x: minOf(tr("w_t0")), as: "w_t0"},
		{x: minOf(atT0(tr("w_arm"))), as: "w_arm"},
		{x: oneIf(binary{countDistinct{tr("w_arm")}, ">", numLit(1)}), as: "w_multi"},
		{x: oneIf(binary{countDistinct{atT0(tr("w_arm"))}, ">", numLit(1)}), as: "w_tied"},
	}, src: cteRef{name("w_t"), "t"}, groupBy: []expr{tr("w_user")}}
	for _, i := range segIdx {
		f.items = append(f.items, item{x: minOf(atT0(tr(segAlias(i)))), as: segAlias(i)})
	}
	q.addCTE(name("w_f"), matDefault, f)

	q.buildEvents(k, name)
	q.buildUnits(k, name, segIdx)
	q.buildCounters(k, name)
}

// segmentIndexes returns the indexes in q.segments of the experiment's
// segment dimensions.
func (q *Query) segmentIndexes(s experiment.Spec) []int {
	var idx []int
	for _, d := range s.Segments {
		for i, qd := range q.segments {
			if qd == d {
				idx = append(idx, i)
			}
		}
	}
	return idx
}

// analysed is the condition that a unit of w_f (alias f) stays in the
// analysis under the spec's multi-arm policy; false for a missing unit.
func analysed(s experiment.Spec, rel string) expr {
	if s.MultiArm == experiment.MultiArmFirst {
		return eq(ref{rel, "w_tied"}, numLit(0))
	}
	return eq(ref{rel, "w_multi"}, numLit(0))
}

// buildEvents adds w_e: the metric events joined to their unit. Each
// event is counted under one fate, in the tallier's order: at or after
// the window end, unit never exposed, unit excluded, before t0, or in
// the unit (and then, per metric, outside its attribution window or a
// conversion).
func (q *Query) buildEvents(k int, name func(string) string) {
	s := q.def.Experiments[k]
	r := func(c string) expr { return ref{"r", c} }
	fr := func(c string) expr { return ref{"f", c} }
	var events []string
	for _, m := range s.Metrics {
		for _, e := range m.Events {
			if !containsString(events, e) {
				events = append(events, e)
			}
		}
	}
	var notLate, late expr
	if s.End != nil {
		late = binary{r("w_ts"), ">=", tsLit(*s.End)}
		notLate = binary{r("w_ts"), "<", tsLit(*s.End)}
	}
	ok := analysed(s, "f")
	in := and(notLate, ok, binary{r("w_ts"), ">=", fr("w_t0")})
	e := &selectStmt{items: []item{
		{x: r("w_user"), as: "w_user"},
		{x: countStar{}, as: "w_n"},
		{x: lateCount(late), as: "w_late"},
		{x: sumIf(and(notLate, isNull{fr("w_user")})), as: "w_never"},
		{x: sumIf(and(notLate, notExpr{isNull{fr("w_user")}}, notExpr{ok})), as: "w_excl"},
		{x: sumIf(and(notLate, ok, binary{r("w_ts"), "<", fr("w_t0")})), as: "w_before"},
		{x: sumIf(in), as: "w_in"},
	}, src: cteRef{"w_rel", "r"},
		joins:   []join{{"LEFT JOIN", cteRef{name("w_f"), "f"}, eq(r("w_user"), fr("w_user"))}},
		where:   inList{r("w_event"), events},
		groupBy: []expr{r("w_user")}}
	for mi, m := range s.Metrics {
		mine := and(in, inList{r("w_event"), m.Events})
		conv := mine
		if w := window(m); w > 0 {
			end := plusWindow{fr("w_t0"), w}
			e.items = append(e.items, item{x: sumIf(and(mine, binary{r("w_ts"), ">=", end})), as: "w_o" + strconv.Itoa(mi+1)})
			conv = and(mine, binary{r("w_ts"), "<", end})
		}
		e.items = append(e.items, item{x: maxOf(oneIf(conv)), as: "w_c" + strconv.Itoa(mi+1)})
	}
	q.addCTE(name("w_e"), matDefault, e)
}

// lateCount counts the events at or after the window end (0 without an
// end).
func lateCount(late expr) expr {
	if late == nil {
		return numLit(0)
	}
	return sumIf(late)
}

// boolFalse is a condition that never holds, for the units of events
// whose unit is missing (their status is NULL).
func boolFalse() expr { return eq(numLit(1), numLit(0)) }

func containsString(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

// buildUnits adds w_a (one row per exposed unit) and the count and arm
// rows of the result.
func (q *Query) buildUnits(k int, name func(string) string, segIdx []int) {
	s := q.def.Experiments[k]
	fr := func(c string) expr { return ref{"f", c} }
	er := func(c string) expr { return ref{"e", c} }
	ok := analysed(s, "f")
	a := &selectStmt{items: []item{
		{x: fr("w_arm"), as: "w_arm"},
		{x: oneIf(ok), as: "w_ok"},
		{x: fr("w_multi"), as: "w_multi"},
		{x: fr("w_tied"), as: "w_tied"},
	}, src: cteRef{name("w_f"), "f"},
		joins: []join{{"LEFT JOIN", cteRef{name("w_e"), "e"}, eq(fr("w_user"), er("w_user"))}}}
	for _, i := range segIdx {
		a.items = append(a.items, item{x: fr(segAlias(i)), as: segAlias(i)})
	}
	var horizon expr
	for mi, m := range s.Metrics {
		a.items = append(a.items, item{x: coalesce(er("w_c"+strconv.Itoa(mi+1)), numLit(0)), as: "w_c" + strconv.Itoa(mi+1)})
		imm := expr(numLit(0))
		if w := window(m); w > 0 {
			if horizon == nil {
				horizon = q.horizon(s, a)
			}
			imm = oneIf(and(ok, binary{plusWindow{fr("w_t0"), w}, ">", horizon}))
		}
		a.items = append(a.items, item{x: imm, as: "w_i" + strconv.Itoa(mi+1)})
	}
	q.addCTE(name("w_a"), matDefault, a)

	ar := func(c string) expr { return ref{"a", c} }
	exp := s.Key
	segs := map[int]expr{}
	group := []expr{ar("w_arm")}
	for _, i := range segIdx {
		segs[i] = ar(segAlias(i))
		group = append(group, ar(segAlias(i)))
	}
	include := s.Maturity == experiment.MaturityInclude
	for mi, m := range s.Metrics {
		c, i := ar("w_c"+strconv.Itoa(mi+1)), ar("w_i"+strconv.Itoa(mi+1))
		units, conv := expr(countStar{}), sumIf(eq(c, numLit(1)))
		if !include {
			units = sumIf(eq(i, numLit(0)))
			conv = sumIf(and(eq(c, numLit(1)), eq(i, numLit(0))))
		}
		row := q.row(&exp, KindCount, "", ar("w_arm"), segs, m.Name, units, conv, sum(i), nil, cteRef{name("w_a"), "a"})
		row.where = eq(ar("w_ok"), numLit(1))
		row.groupBy = group
		q.union = append(q.union, row)
	}

	xr := func(c string) expr { return ref{"x", c} }
	q.addCTE(name("w_g"), matDefault, &selectStmt{items: []item{{x: xr("w_arm"), as: "w_arm"}, {x: minOf(xr("w_ts")), as: "w_first"}},
		src: cteRef{name("w_x"), "x"}, groupBy: []expr{xr("w_arm")}})
	q.addCTE(name("w_n"), matDefault, &selectStmt{items: []item{{x: ar("w_arm"), as: "w_arm"}, {x: countStar{}, as: "w_exposed"}, {x: sum(ar("w_ok")), as: "w_units"}},
		src: cteRef{name("w_a"), "a"}, groupBy: []expr{ar("w_arm")}})
	gr := func(c string) expr { return ref{"g", c} }
	nr := func(c string) expr { return ref{"n", c} }
	arm := q.row(&exp, KindArm, "", gr("w_arm"), nil, "", coalesce(nr("w_exposed"), numLit(0)), coalesce(nr("w_units"), numLit(0)), nil, gr("w_first"), cteRef{name("w_g"), "g"})
	arm.joins = []join{{"LEFT JOIN", cteRef{name("w_n"), "n"}, eq(gr("w_arm"), nr("w_arm"))}}
	q.union = append(q.union, arm)
}

// horizon returns the maturity horizon of a spec: its end, or the data's
// freshness (w_input joined to a).
func (q *Query) horizon(s experiment.Spec, a *selectStmt) expr {
	if s.End != nil {
		return tsLit(*s.End)
	}
	a.joins = append(a.joins, join{kind: "CROSS JOIN", src: cteRef{"w_input", "i"}})
	return ref{"i", "w_fresh"}
}

// buildCounters adds the experiment's counter rows.
func (q *Query) buildCounters(k int, name func(string) string) {
	s := q.def.Experiments[k]
	exp := s.Key
	r := func(c string) expr { return ref{"r", c} }
	match := q.keyMatch(s, r("w_key"))
	mine := match
	if mine == nil {
		mine = eq(numLit(1), numLit(1))
	}
	var outside expr = boolFalse()
	if w := timeWindow(s, r("w_ts")); w != nil {
		outside = notExpr{w}
	}
	var other expr = boolFalse()
	if match != nil {
		other = notExpr{match}
	}
	q.addCTE(name("w_xc"), matDefault, &selectStmt{items: []item{
		{x: sumIf(mine), as: "w_rows"},
		{x: sumIf(and(mine, outside)), as: "w_outside"},
		{x: sumIf(other), as: "w_other"},
	}, src: cteRef{"w_rel", "r"}, where: eq(r("w_event"), strLit(s.ExposureEvent))})
	er := func(c string) expr { return ref{"e", c} }
	ec := &selectStmt{src: cteRef{name("w_e"), "e"}}
	for _, c := range []string{"w_n", "w_late", "w_never", "w_excl", "w_before", "w_in"} {
		ec.items = append(ec.items, item{x: sum(er(c)), as: c})
	}
	for mi, m := range s.Metrics {
		if window(m) > 0 {
			c := "w_o" + strconv.Itoa(mi+1)
			ec.items = append(ec.items, item{x: sum(er(c)), as: c})
		}
	}
	q.addCTE(name("w_ec"), matDefault, ec)
	ar := func(c string) expr { return ref{"a", c} }
	tied := sum(ar("w_tied"))
	if s.MultiArm != experiment.MultiArmFirst {
		tied = numLit(0) // tied units are multi-arm units under exclude
	}
	q.addCTE(name("w_uc"), matDefault, &selectStmt{items: []item{
		{x: countStar{}, as: "w_units"},
		{x: sum(ar("w_multi")), as: "w_multi"},
		{x: tied, as: "w_tied"},
	}, src: cteRef{name("w_a"), "a"}})

	counter := func(cte, col, counter, metric string) {
		src := cteRef{name(cte), "c"}
		q.union = append(q.union, q.row(&exp, KindCounter, counter, nil, nil, metric, coalesce(ref{"c", col}, numLit(0)), nil, nil, nil, src))
	}
	counter("w_xc", "w_rows", CounterExposureRows, "")
	counter("w_xc", "w_outside", CounterOutsideWindow, "")
	counter("w_xc", "w_other", CounterOtherExperiment, "")
	counter("w_ec", "w_n", CounterMetricEvents, "")
	counter("w_ec", "w_late", CounterAfterWindowEnd, "")
	counter("w_ec", "w_never", CounterUnitNeverExposed, "")
	counter("w_ec", "w_excl", CounterUnitExcluded, "")
	counter("w_ec", "w_before", CounterBeforeExposure, "")
	counter("w_ec", "w_in", CounterInUnit, "")
	for mi, m := range s.Metrics {
		if window(m) > 0 {
			counter("w_ec", "w_o"+strconv.Itoa(mi+1), CounterOutsideAttribution, m.Name)
		}
	}
	counter("w_uc", "w_units", CounterUnitsExposed, "")
	counter("w_uc", "w_multi", CounterMultiArm, "")
	counter("w_uc", "w_tied", CounterTied, "")
}
