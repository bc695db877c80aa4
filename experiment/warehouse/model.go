package warehouse

import (
	"strconv"
	"strings"
	"time"
)

// The query model: expressions, SELECT statements and common table
// expressions, built once from the definition and rendered per dialect.
// Every name that comes from the user (a column, the table, a literal)
// is rendered through Dialect.ident or Dialect.str; the names the model
// makes itself (w_ aliases, CTE names) are plain lower-case words.

// expr is an expression of the model.
type expr interface{ sql(d Dialect) string }

type (
	// ref is a column the model named itself, as rel.name.
	ref struct{ rel, name string }
	// userCol is a column of the user's table.
	userCol struct{ name string }
	strLit  string
	numLit  int64
	nullLit struct{}
	tsLit   time.Time
	// plusWindow is x + w (a window of whole microseconds).
	plusWindow struct {
		x expr
		w time.Duration
	}
	castText struct{ x expr }
	castInt  struct{ x expr }
	// typedNull is a NULL of the text or integer type.
	typedNull struct{ text bool }
	binary    struct {
		a  expr
		op string
		b  expr
	}
	notExpr struct{ x expr }
	isNull  struct{ x expr }
	inList  struct {
		x    expr
		vals []string
	}
	caseWhen struct {
		whens []when
		els   expr
	}
	when struct{ cond, then expr }
	call struct {
		fn   string
		args []expr
	}
	countDistinct struct{ x expr }
	countStar     struct{}
	// minOver is MIN(x) over the rows of the same part (a window).
	minOver struct{ x, part expr }
	// collated is text that compares and sorts by its bytes.
	collated struct{ x expr }
)

func (r ref) sql(Dialect) string {
	if r.rel == "" {
		return r.name
	}
	return r.rel + "." + r.name
}
func (c userCol) sql(d Dialect) string { return d.ident(c.name) }
func (s strLit) sql(d Dialect) string  { return d.str(string(s)) }
func (n numLit) sql(Dialect) string    { return strconv.FormatInt(int64(n), 10) }
func (nullLit) sql(Dialect) string     { return "NULL" }
func (t tsLit) sql(d Dialect) string   { return d.timestamp(time.Time(t)) }
func (p plusWindow) sql(d Dialect) string {
	s, err := d.addDuration(p.x.sql(d), p.w)
	if err != nil {
		// Query.SQL checks every window first; this is not reached.
		panic(err)
	}
	return s
}
func (c castText) sql(d Dialect) string { return "CAST(" + c.x.sql(d) + " AS " + d.stringType() + ")" }
func (c castInt) sql(d Dialect) string  { return "CAST(" + c.x.sql(d) + " AS " + d.intType() + ")" }
func (n typedNull) sql(d Dialect) string {
	if n.text {
		return "CAST(NULL AS " + d.stringType() + ")"
	}
	return "CAST(NULL AS " + d.intType() + ")"
}
func (b binary) sql(d Dialect) string  { return "(" + b.a.sql(d) + " " + b.op + " " + b.b.sql(d) + ")" }
func (n notExpr) sql(d Dialect) string { return "(NOT " + n.x.sql(d) + ")" }
func (n isNull) sql(d Dialect) string  { return "(" + n.x.sql(d) + " IS NULL)" }
func (in inList) sql(d Dialect) string {
	if len(in.vals) == 1 {
		return "(" + in.x.sql(d) + " = " + d.str(in.vals[0]) + ")"
	}
	parts := make([]string, len(in.vals))
	for i, v := range in.vals {
		parts[i] = d.str(v)
	}
	return "(" + in.x.sql(d) + " IN (" + strings.Join(parts, ", ") + "))"
}
func (c caseWhen) sql(d Dialect) string {
	var b strings.Builder
	b.WriteString("CASE")
	for _, w := range c.whens {
		b.WriteString(" WHEN " + w.cond.sql(d) + " THEN " + w.then.sql(d))
	}
	if c.els != nil {
		b.WriteString(" ELSE " + c.els.sql(d))
	}
	b.WriteString(" END")
	return b.String()
}
func (c call) sql(d Dialect) string {
	args := make([]string, len(c.args))
	for i, a := range c.args {
		args[i] = a.sql(d)
	}
	return c.fn + "(" + strings.Join(args, ", ") + ")"
}
func (c countDistinct) sql(d Dialect) string { return "COUNT(DISTINCT " + c.x.sql(d) + ")" }
func (countStar) sql(Dialect) string         { return "COUNT(*)" }
func (m minOver) sql(d Dialect) string {
	return "MIN(" + m.x.sql(d) + ") OVER (PARTITION BY " + m.part.sql(d) + ")"
}
func (c collated) sql(d Dialect) string { return d.bytewise(c.x.sql(d)) }

// Helpers that keep the builder readable.
func and(xs ...expr) expr {
	var out expr
	for _, x := range xs {
		if x == nil {
			continue
		}
		if out == nil {
			out = x
		} else {
			out = binary{out, "AND", x}
		}
	}
	return out
}
func or(a, b expr) expr       { return binary{a, "OR", b} }
func eq(a, b expr) expr       { return binary{a, "=", b} }
func oneIf(cond expr) expr    { return caseWhen{whens: []when{{cond, numLit(1)}}, els: numLit(0)} }
func sum(x expr) expr         { return call{"SUM", []expr{x}} }
func sumIf(cond expr) expr    { return sum(oneIf(cond)) }
func maxOf(x expr) expr       { return call{"MAX", []expr{x}} }
func minOf(x expr) expr       { return call{"MIN", []expr{x}} }
func coalesce(a, b expr) expr { return call{"COALESCE", []expr{a, b}} }
func emptyOrNull(x expr) expr { return or(isNull{x}, eq(x, strLit(""))) }

// item is one output column of a SELECT: an internal alias (as), or a
// quoted one (quoted, for the result's columns).
type item struct {
	x      expr
	as     string
	quoted bool
}

// source is what a FROM or JOIN reads.
type source interface{ from(d Dialect) string }

type (
	// tableRef is the user's table, its name in dotted parts.
	tableRef struct {
		parts []string
		alias string
	}
	cteRef struct{ name, alias string }
)

func (t tableRef) from(d Dialect) string {
	q := make([]string, len(t.parts))
	for i, p := range t.parts {
		q[i] = d.ident(p)
	}
	return strings.Join(q, ".") + " " + t.alias
}
func (c cteRef) from(Dialect) string { return c.name + " " + c.alias }

type join struct {
	kind string // "JOIN", "LEFT JOIN" or "CROSS JOIN"
	src  source
	on   expr
}

// selectStmt is one SELECT.
type selectStmt struct {
	items   []item
	src     source
	joins   []join
	where   expr
	groupBy []expr
}

func (s *selectStmt) sql(d Dialect, indent string) string {
	var b strings.Builder
	b.WriteString(indent + "SELECT ")
	for i, it := range s.items {
		if i > 0 {
			b.WriteString(",\n" + indent + "  ")
		}
		b.WriteString(it.x.sql(d))
		switch {
		case it.quoted:
			b.WriteString(" AS " + d.ident(it.as))
		case it.as != "":
			b.WriteString(" AS " + it.as)
		}
	}
	b.WriteString("\n" + indent + "FROM " + s.src.from(d))
	for _, j := range s.joins {
		b.WriteString("\n" + indent + j.kind + " " + j.src.from(d))
		if j.on != nil {
			b.WriteString(" ON " + j.on.sql(d))
		}
	}
	if s.where != nil {
		b.WriteString("\n" + indent + "WHERE " + s.where.sql(d))
	}
	if len(s.groupBy) > 0 {
		parts := make([]string, len(s.groupBy))
		for i, g := range s.groupBy {
			parts[i] = g.sql(d)
		}
		b.WriteString("\n" + indent + "GROUP BY " + strings.Join(parts, ", "))
	}
	return b.String()
}

// cte is one common table expression; mat asks the engine to compute it
// once where the dialect can say so.
type cte struct {
	name string
	mat  materialize
	body *selectStmt
}

// materialize says how a CTE is to be computed.
type materialize int

const (
	matDefault materialize = iota
	// matOnce: computed once and read by every reference (the relevant
	// rows, read by each experiment).
	matOnce
	// matInline: folded into each reference, so that its filters reach
	// the table scan (the classified table, read twice).
	matInline
)
