package report

import (
	"fmt"
	"io"
	"iter"
	"slices"

	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/experiment"
)

// Audit table column names. Segment and metric columns are named
// AuditSegmentPrefix + dimension, AuditConvertedPrefix + metric and
// AuditImmaturePrefix + metric.
const (
	AuditUnit            = "unit"
	AuditArm             = "arm"
	AuditFirstExposure   = "first_exposure"
	AuditStatus          = "status"
	AuditMultiArm        = "multi_arm"
	AuditSegmentPrefix   = "segment_"
	AuditConvertedPrefix = "converted_"
	AuditImmaturePrefix  = "immature_"
)

// auditRowGroup is the most rows per Parquet row group of the audit table.
const auditRowGroup = 1 << 18

// orderedGroup is a Parquet group whose fields keep the order given
// (parquet.Group sorts them by name).
type orderedGroup struct {
	parquet.Group
	order []string
}

// Fields returns the group's fields in the order given.
func (g orderedGroup) Fields() []parquet.Field {
	fields := slices.Clone(g.Group.Fields())
	rank := make(map[string]int, len(g.order))
	for i, n := range g.order {
		rank[n] = i
	}
	slices.SortStableFunc(fields, func(a, b parquet.Field) int { return rank[a.Name()] - rank[b.Name()] })
	return fields
}

// auditColumn is one column of the audit table and how a record fills it.
type auditColumn struct {
	name string
	node parquet.Node
	// value returns the cell of rec; ok false is a null.
	value func(rec experiment.UnitRecord) (v parquet.Value, ok bool)
}

func auditColumns(spec experiment.Spec) []auditColumn {
	str := func(s string) parquet.Value { return parquet.ByteArrayValue([]byte(s)) }
	flag := func(b bool) parquet.Value {
		if b {
			return parquet.Int32Value(1)
		}
		return parquet.Int32Value(0)
	}
	cols := []auditColumn{
		{AuditUnit, parquet.String(), func(r experiment.UnitRecord) (parquet.Value, bool) { return str(r.Unit), true }},
		{AuditArm, parquet.String(), func(r experiment.UnitRecord) (parquet.Value, bool) { return str(r.Arm), true }},
		{AuditFirstExposure, parquet.Optional(parquet.Timestamp(parquet.Nanosecond)), func(r experiment.UnitRecord) (parquet.Value, bool) {
			return parquet.Int64Value(r.T0), r.HasT0
		}},
		{AuditStatus, parquet.String(), func(r experiment.UnitRecord) (parquet.Value, bool) { return str(r.Status.String()), true }},
		{AuditMultiArm, parquet.Leaf(parquet.BooleanType), func(r experiment.UnitRecord) (parquet.Value, bool) {
			return parquet.BooleanValue(r.MultiArm), true
		}},
	}
	for d, dim := range spec.Segments {
		cols = append(cols, auditColumn{AuditSegmentPrefix + dim, parquet.Optional(parquet.String()), func(r experiment.UnitRecord) (parquet.Value, bool) {
			v := r.Segments[d]
			return str(v.Value), v.Valid
		}})
	}
	for m, mt := range spec.Metrics {
		analysed := func(r experiment.UnitRecord) bool { return r.Status == experiment.StatusAnalysed }
		cols = append(cols,
			auditColumn{AuditConvertedPrefix + mt.Name, parquet.Optional(parquet.Int(8)), func(r experiment.UnitRecord) (parquet.Value, bool) {
				return flag(r.Converted[m]), analysed(r)
			}},
			auditColumn{AuditImmaturePrefix + mt.Name, parquet.Optional(parquet.Int(8)), func(r experiment.UnitRecord) (parquet.Value, bool) {
				return flag(r.Immature[m]), analysed(r)
			}})
	}
	return cols
}

// AuditSchema returns the Parquet schema of the audit table of spec: in
// order, unit and arm (strings), first_exposure (TIMESTAMP(NANOS), UTC;
// null when the input had no exposure times), status (analysed, multi_arm
// or tied), multi_arm (boolean: exposed to two or more arms, whatever the
// policy made of it), one optional string column segment_<dimension> per
// segment dimension (null for a null value), and per metric two optional
// INT(8) columns, converted_<metric> and immature_<metric>, 1 or 0 for an
// analysed unit and null for a unit the multi-arm policy left out.
func AuditSchema(spec experiment.Spec) (*parquet.Schema, error) {
	cols := auditColumns(spec)
	g := orderedGroup{Group: parquet.Group{}}
	for _, c := range cols {
		if _, dup := g.Group[c.name]; dup {
			return nil, fmt.Errorf("audit table: two columns named %q", c.name)
		}
		g.Group[c.name] = c.node
		g.order = append(g.order, c.name)
	}
	return parquet.NewSchema("armtally_audit", g), nil
}

// WriteAudit writes the per-unit audit table of the first stage of a tally
// (Tallier.Units or UnitTableTallier.Units) to w as Parquet, one row per
// record, in the schema of AuditSchema. Records must come sorted by unit,
// each unit once (as those methods yield them): the table is then sorted
// by unit, and the same records give the same bytes. A record out of
// order, or one whose slices do not match the spec, is an error naming the
// unit; rows already written stay in w, so write through WriteFileAtomic.
func WriteAudit(w io.Writer, spec experiment.Spec, records iter.Seq[experiment.UnitRecord]) error {
	schema, err := AuditSchema(spec)
	if err != nil {
		return err
	}
	cols := auditColumns(spec)
	index := make([]int, len(cols))
	for i, c := range cols {
		leaf, ok := schema.Lookup(c.name)
		if !ok {
			return fmt.Errorf("audit table: column %q missing from the schema", c.name)
		}
		index[i] = leaf.ColumnIndex
	}
	pw := parquet.NewWriter(w, schema, parquet.MaxRowsPerRowGroup(auditRowGroup))
	var (
		prev  string
		first = true
		batch []parquet.Row
		werr  error
	)
	flush := func() error {
		if len(batch) == 0 {
			return nil
		}
		_, err := pw.WriteRows(batch)
		batch = batch[:0]
		return err
	}
	for rec := range records {
		if !first && rec.Unit <= prev {
			werr = fmt.Errorf("audit table: unit %q comes after %q: records must be sorted by unit, each once", rec.Unit, prev)
			break
		}
		first, prev = false, rec.Unit
		if len(rec.Segments) != len(spec.Segments) || len(rec.Converted) != len(spec.Metrics) || len(rec.Immature) != len(spec.Metrics) {
			werr = fmt.Errorf("audit table: unit %q: record has %d segment values and %d/%d flags for %d dimensions and %d metrics",
				rec.Unit, len(rec.Segments), len(rec.Converted), len(rec.Immature), len(spec.Segments), len(spec.Metrics))
			break
		}
		row := make(parquet.Row, len(cols))
		for i, c := range cols {
			v, ok := c.value(rec)
			optional := c.node.Optional()
			switch {
			case !ok:
				v = parquet.NullValue().Level(0, 0, index[i])
			case optional:
				v = v.Level(0, 1, index[i])
			default:
				v = v.Level(0, 0, index[i])
			}
			row[index[i]] = v
		}
		batch = append(batch, row)
		if len(batch) == 1024 {
			if werr = flush(); werr != nil {
				break
			}
		}
	}
	if werr == nil {
		werr = flush()
	}
	if werr != nil {
		pw.Close()
		return werr
	}
	return pw.Close()
}
