package warehouse

import (
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/armtally/armtally/experiment"
)

// Columns names the physical columns of the event table. Experiment may
// be "" when the table has no experiment column (every exposure row then
// belongs to every experiment, as for files); the others are required.
type Columns struct {
	User, TS, Event, Experiment, Arm string
}

// Definition is what a query computes: the experiments of one spec over
// one event table. Table is the table's name in dotted parts (schema,
// table; BigQuery's project, dataset, table), each part quoted on its own.
type Definition struct {
	Table       []string
	Columns     Columns
	Experiments []experiment.Spec
}

// Result columns, in order; the segment columns (one per segment
// dimension of any experiment, named after it) come between ColArm and
// ColMetric.
const (
	ColExperiment  = "experiment"
	ColKind        = "kind"
	ColName        = "name"
	ColArm         = "arm"
	ColMetric      = "metric"
	ColUnits       = "units"
	ColConversions = "conversions"
	ColImmature    = "immature"
	ColAt          = "at_time"
)

// Row kinds of the result (the kind column).
const (
	// KindCount is a cell of the counts shape: arm, segment values,
	// metric, units, conversions, immature units.
	KindCount = "count"
	// KindArm is an arm seen in the window: units holds the units whose
	// first exposure was in it, conversions those analysed (after the
	// multi-arm policy), at_time its earliest in-window exposure.
	KindArm = "arm"
	// KindCounter is a counter of one experiment's diagnostics: name
	// names it (the Counter constants), units holds it; for
	// CounterOutsideAttribution, metric names the metric.
	KindCounter = "counter"
	// KindInput is a counter of the whole table (experiment NULL): name
	// is rows_read, valid_rows, exposure_event_rows, freshness (at_time
	// holds it) or a bad-row reason.
	KindInput = "input"
	// KindKey is an experiment key seen on exposure rows (experiment
	// NULL; only for experiments without a key).
	KindKey = "key"
)

// Counter names of KindCounter and KindInput rows.
const (
	CounterExposureRows       = "exposure_rows"
	CounterOutsideWindow      = "exposures_outside_window"
	CounterOtherExperiment    = "other_experiment"
	CounterMetricEvents       = "metric_events"
	CounterAfterWindowEnd     = "after_window_end"
	CounterUnitNeverExposed   = "unit_never_exposed"
	CounterUnitExcluded       = "unit_excluded"
	CounterBeforeExposure     = "before_exposure"
	CounterInUnit             = "metric_events_in_unit"
	CounterOutsideAttribution = "outside_attribution_window"
	CounterUnitsExposed       = "units_exposed"
	CounterMultiArm           = "multi_arm_units"
	CounterTied               = "tied_units"
	InputRowsRead             = "rows_read"
	InputValidRows            = "valid_rows"
	InputExposureEventRows    = "exposure_event_rows"
	InputFreshness            = "freshness"
)

// BadReasons are the bad-row reasons the query counts, in the order it
// decides them (the order of ingest's row check): a row is counted under
// the first that applies. A typed table has no bad_timestamp,
// timestamp_out_of_range or wrong_field_count rows.
var badReasons = []string{"null_user", "null_timestamp", "null_event", "exposure_without_arm", "unknown_arm"}

// Query is the query model of a Definition: render it with SQL.
type Query struct {
	def      Definition
	segments []string // the union of the experiments' segment dimensions
	ctes     []cte
	union    []*selectStmt
}

// Build checks the definition and returns its query model. The checks
// are those of a run over files (each spec as experiment.NewTallier takes
// it, one exposure event for all, distinct keys) and those of the query
// (every column named, no segment dimension named like a result column).
func Build(def Definition) (*Query, error) {
	if err := checkDefinition(def); err != nil {
		return nil, err
	}
	q := &Query{def: def}
	for _, s := range def.Experiments {
		for _, d := range s.Segments {
			if !slices.Contains(q.segments, d) {
				q.segments = append(q.segments, d)
			}
		}
	}
	for _, d := range q.segments {
		for _, c := range []string{ColExperiment, ColKind, ColName, ColArm, ColMetric, ColUnits, ColConversions, ColImmature, ColAt} {
			if strings.EqualFold(d, c) {
				return nil, fmt.Errorf("segment dimension %q has the name of a result column of the query", d)
			}
		}
	}
	q.build()
	return q, nil
}

func checkDefinition(def Definition) error {
	if len(def.Table) == 0 {
		return errors.New("no table named")
	}
	for _, p := range def.Table {
		if p == "" {
			return fmt.Errorf("table name %q has an empty part", strings.Join(def.Table, "."))
		}
		if err := checkText("table name part", p); err != nil {
			return err
		}
	}
	c := def.Columns
	for _, col := range []struct{ what, name string }{{"user", c.User}, {"ts", c.TS}, {"event", c.Event}, {"arm", c.Arm}} {
		if col.name == "" {
			return fmt.Errorf("no %s column named", col.what)
		}
	}
	if len(def.Experiments) == 0 {
		return errors.New("no experiments")
	}
	keys := map[string]bool{}
	for i, s := range def.Experiments {
		if _, err := experiment.NewTallier(s); err != nil {
			return err
		}
		if s.ExposureEvent != def.Experiments[0].ExposureEvent {
			return fmt.Errorf("experiments with different exposure events in one query (%q and %q): write one query each", def.Experiments[0].ExposureEvent, s.ExposureEvent)
		}
		if keys[s.Key] {
			return fmt.Errorf("experiment key %q appears twice", s.Key)
		}
		keys[s.Key] = true
		if err := checkTexts(def, s); err != nil {
			return fmt.Errorf("experiment %d: %w", i+1, err)
		}
	}
	return nil
}

// checkTexts refuses names no literal can carry (see checkText).
func checkTexts(def Definition, s experiment.Spec) error {
	texts := []string{def.Columns.User, def.Columns.TS, def.Columns.Event, def.Columns.Experiment, def.Columns.Arm, s.Key, s.ExposureEvent}
	texts = append(texts, s.Arms...)
	texts = append(texts, s.Segments...)
	for _, m := range s.Metrics {
		texts = append(texts, m.Name)
		texts = append(texts, m.Events...)
	}
	for _, t := range texts {
		if err := checkText("name", t); err != nil {
			return err
		}
	}
	return nil
}

// SQL renders the query for a dialect, without a trailing semicolon.
func (q *Query) SQL(d Dialect) (string, error) {
	if d < DuckDB || d > Snowflake {
		return "", fmt.Errorf("unknown dialect %v", d)
	}
	for _, s := range q.def.Experiments {
		for _, m := range s.Metrics {
			if m.Window > 0 {
				if _, err := d.addDuration("x", m.Window); err != nil {
					return "", fmt.Errorf("experiment %q, metric %q: %w", s.Key, m.Name, err)
				}
			}
		}
	}
	var b strings.Builder
	b.WriteString("-- armtally: counts and diagnostics of " + strconv.Itoa(len(q.def.Experiments)) + " experiment(s), " + d.String() + " dialect\n")
	b.WriteString("WITH\n")
	for i, c := range q.ctes {
		if i > 0 {
			b.WriteString(",\n")
		}
		b.WriteString(c.name + " AS " + d.materialized(c.mat) + "(\n" + c.body.sql(d, "  ") + "\n)")
	}
	b.WriteString("\n")
	for i, s := range q.union {
		if i > 0 {
			b.WriteString("\nUNION ALL\n")
		}
		b.WriteString(s.sql(d, ""))
	}
	return b.String(), nil
}

// ResultColumns returns the names of the result's columns, in order.
func (q *Query) ResultColumns() []string {
	cols := []string{ColExperiment, ColKind, ColName, ColArm}
	cols = append(cols, q.segments...)
	return append(cols, ColMetric, ColUnits, ColConversions, ColImmature, ColAt)
}

// segAlias is the internal name of segment column i (of q.segments).
func segAlias(i int) string { return "w_s" + strconv.Itoa(i+1) }

func (q *Query) addCTE(name string, mat materialize, s *selectStmt) {
	q.ctes = append(q.ctes, cte{name: name, mat: mat, body: s})
}

// build fills the CTEs and the branches of the result.
func (q *Query) build() {
	q.buildInput()
	for k := range q.def.Experiments {
		q.buildExperiment(k)
	}
}

// exposureEvent is the one exposure event of the experiments.
func (q *Query) exposureEvent() string { return q.def.Experiments[0].ExposureEvent }

// buildInput adds w_class (each row with its bad-row reason), w_input
// (the counters of the whole table), w_rel (the valid rows of the
// exposure event and the metrics' events, computed once) and the input
// and key rows of the result.
func (q *Query) buildInput() {
	c := q.def.Columns
	t := func(name string) expr { return userCol{name} }
	var key expr = strLit("")
	if c.Experiment != "" {
		key = coalesce(castText{t(c.Experiment)}, strLit(""))
	}
	user, ts, ev, arm := ref{"", "w_user"}, ref{"", "w_ts"}, ref{"", "w_event"}, ref{"", "w_arm"}
	expo := eq(ev, strLit(q.exposureEvent()))
	bad := caseWhen{whens: []when{
		{emptyOrNull(user), numLit(1)},
		{isNull{ts}, numLit(2)},
		{emptyOrNull(ev), numLit(3)},
		{and(expo, emptyOrNull(arm)), numLit(4)},
	}, els: numLit(0)}
	if unknown := q.unknownArm(ref{"", "w_key"}, arm); unknown != nil {
		bad.whens = append(bad.whens, when{and(expo, unknown), numLit(5)})
	}
	// w_class is two selects deep so that the reason can name the cast
	// columns.
	base := &selectStmt{items: []item{
		{x: castText{t(c.User)}, as: "w_user"},
		{x: t(c.TS), as: "w_ts"},
		{x: castText{t(c.Event)}, as: "w_event"},
		{x: key, as: "w_key"},
		{x: collated{castText{t(c.Arm)}}, as: "w_arm"},
	}, src: tableRef{q.def.Table, "t"}}
	for i, s := range q.segments {
		base.items = append(base.items, item{x: collated{castText{t(s)}}, as: segAlias(i)})
	}
	q.addCTE("w_base", matInline, base)
	cls := &selectStmt{src: cteRef{"w_base", "b"}}
	for _, it := range base.items {
		cls.items = append(cls.items, item{x: ref{"b", it.as}, as: it.as})
	}
	cls.items = append(cls.items, item{x: withRel(bad, "b"), as: "w_bad"})
	q.addCTE("w_class", matInline, cls)

	c0 := ref{"c", "w_bad"}
	in := &selectStmt{items: []item{
		{x: countStar{}, as: "w_rows"},
		{x: sumIf(eq(c0, numLit(0))), as: "w_valid"},
		{x: sumIf(and(eq(c0, numLit(0)), eq(ref{"c", "w_event"}, strLit(q.exposureEvent())))), as: "w_expo"},
		{x: maxOf(caseWhen{whens: []when{{eq(c0, numLit(0)), ref{"c", "w_ts"}}}}), as: "w_fresh"},
	}, src: cteRef{"w_class", "c"}}
	for i := range badReasons {
		in.items = append(in.items, item{x: sumIf(eq(c0, numLit(int64(i+1)))), as: "w_bad" + strconv.Itoa(i+1)})
	}
	q.addCTE("w_input", matDefault, in)

	events := []string{q.exposureEvent()}
	for _, s := range q.def.Experiments {
		for _, m := range s.Metrics {
			for _, e := range m.Events {
				if !slices.Contains(events, e) {
					events = append(events, e)
				}
			}
		}
	}
	rel := &selectStmt{src: cteRef{"w_class", "c"}, where: and(eq(c0, numLit(0)), inList{ref{"c", "w_event"}, events})}
	for _, it := range base.items {
		rel.items = append(rel.items, item{x: ref{"c", it.as}, as: it.as})
	}
	q.addCTE("w_rel", matOnce, rel)

	i := func(name string) expr { return ref{"i", name} }
	q.union = append(q.union, q.row(nil, KindInput, InputFreshness, nil, nil, "", nil, nil, nil, i("w_fresh"), cteRef{"w_input", "i"}))
	for _, r := range []struct{ name, col string }{{InputRowsRead, "w_rows"}, {InputValidRows, "w_valid"}, {InputExposureEventRows, "w_expo"}} {
		q.union = append(q.union, q.row(nil, KindInput, r.name, nil, nil, "", i(r.col), nil, nil, nil, cteRef{"w_input", "i"}))
	}
	for k, reason := range badReasons {
		q.union = append(q.union, q.row(nil, KindInput, reason, nil, nil, "", i("w_bad"+strconv.Itoa(k+1)), nil, nil, nil, cteRef{"w_input", "i"}))
	}
	needKeys := false
	for _, s := range q.def.Experiments {
		needKeys = needKeys || s.Key == ""
	}
	if needKeys && c.Experiment != "" {
		keys := q.row(nil, KindKey, "", nil, nil, "", nil, nil, nil, nil, cteRef{"w_rel", "r"})
		keys.items[2].x = ref{"r", "w_key"}
		keys.where = eq(ref{"r", "w_event"}, strLit(q.exposureEvent()))
		keys.groupBy = []expr{ref{"r", "w_key"}}
		q.union = append(q.union, keys)
	}
}

// unknownArm returns the condition of an exposure in an arm its
// experiment did not plan, as the file reader checks it (a row's key
// picks the planned arms of the experiment of that key, or of the
// experiment without a key; rows of other keys are not checked), or nil
// when no experiment lists arms.
func (q *Query) unknownArm(key, arm expr) expr {
	var whens []when
	var fallback expr
	for _, s := range q.def.Experiments {
		if len(s.Arms) == 0 {
			continue
		}
		notPlanned := oneIf(notExpr{inList{arm, s.Arms}})
		if s.Key == "" {
			fallback = notPlanned
			continue
		}
		whens = append(whens, when{eq(key, strLit(s.Key)), notPlanned})
	}
	if whens == nil && fallback == nil {
		return nil
	}
	if fallback == nil {
		fallback = numLit(0)
	}
	if whens == nil {
		return eq(fallback, numLit(1))
	}
	return eq(caseWhen{whens: whens, els: fallback}, numLit(1))
}

// withRel returns x with its own column references (rel "") taken from
// rel.
func withRel(x expr, rel string) expr {
	switch v := x.(type) {
	case ref:
		if v.rel == "" {
			return ref{rel, v.name}
		}
		return v
	case binary:
		return binary{withRel(v.a, rel), v.op, withRel(v.b, rel)}
	case notExpr:
		return notExpr{withRel(v.x, rel)}
	case isNull:
		return isNull{withRel(v.x, rel)}
	case inList:
		return inList{withRel(v.x, rel), v.vals}
	case caseWhen:
		out := caseWhen{els: v.els}
		if v.els != nil {
			out.els = withRel(v.els, rel)
		}
		for _, w := range v.whens {
			out.whens = append(out.whens, when{withRel(w.cond, rel), withRel(w.then, rel)})
		}
		return out
	}
	return x
}

// row returns one branch of the result's UNION ALL: the columns in
// ResultColumns order, NULL where nil.
func (q *Query) row(exp *string, kind, name string, arm expr, segs map[int]expr, metric string, units, conv, imm, at expr, src source) *selectStmt {
	text := func(s *string) expr {
		if s == nil {
			return typedNull{text: true}
		}
		return strLit(*s)
	}
	orNull := func(x expr, isText bool) expr {
		if x == nil {
			return typedNull{text: isText}
		}
		if isText {
			return x
		}
		return castInt{x}
	}
	var nameX, metricX expr = typedNull{text: true}, typedNull{text: true}
	if name != "" {
		nameX = strLit(name)
	}
	if metric != "" {
		metricX = strLit(metric)
	}
	s := &selectStmt{src: src, items: []item{
		{x: text(exp), as: ColExperiment, quoted: true},
		{x: strLit(kind), as: ColKind, quoted: true},
		{x: nameX, as: ColName, quoted: true},
		{x: orNull(arm, true), as: ColArm, quoted: true},
	}}
	for i, d := range q.segments {
		s.items = append(s.items, item{x: orNull(segs[i], true), as: d, quoted: true})
	}
	var atX expr = nullLit{}
	if at != nil {
		atX = at
	}
	s.items = append(s.items,
		item{x: metricX, as: ColMetric, quoted: true},
		item{x: orNull(units, false), as: ColUnits, quoted: true},
		item{x: orNull(conv, false), as: ColConversions, quoted: true},
		item{x: orNull(imm, false), as: ColImmature, quoted: true},
		item{x: atX, as: ColAt, quoted: true})
	return s
}

// timeWindow returns the condition ts in [start, end) of a spec, nil
// when the window is all the data.
func timeWindow(s experiment.Spec, ts expr) expr {
	var c expr
	if s.Start != nil {
		c = and(c, binary{ts, ">=", tsLit(*s.Start)})
	}
	if s.End != nil {
		c = and(c, binary{ts, "<", tsLit(*s.End)})
	}
	return c
}

// keyMatch returns the condition that an exposure row's key is the
// experiment's, nil when every exposure row is the experiment's (no key,
// or no experiment column).
func (q *Query) keyMatch(s experiment.Spec, key expr) expr {
	if s.Key == "" || q.def.Columns.Experiment == "" {
		return nil
	}
	return eq(key, strLit(s.Key))
}

// window returns the duration of a metric's attribution window, 0 when
// unlimited.
func window(m experiment.Metric) time.Duration { return max(m.Window, 0) }

// Table returns the table's name as given, its parts joined by dots, for
// messages.
func (q *Query) Table() string { return strings.Join(q.def.Table, ".") }
