package ingest

import (
	"math"
	"strconv"
	"unsafe"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/deprecated"
	"github.com/parquet-go/parquet-go/format"
)

// tsDecoder is the one decoder of Parquet timestamps: the row-by-row event
// reader (parquetReader), the bulk path (bulkColumn) and the table readers
// (parquetTable) all turn a ts column's values into nanoseconds since the
// epoch, UTC, with it. newTSDecoder reads the column's type once: INT64
// TIMESTAMP in milli-, micro- or nanoseconds (not UTC-adjusted is taken as
// UTC) or the older TIMESTAMP_MILLIS/MICROS converted types, INT96 (Impala
// and Spark), INT32 DATE (midnight UTC), a plain INT32 or INT64 with the
// epoch unit, or BYTE_ARRAY text (parseTSText).
type tsDecoder struct {
	kind      valueKind // one of the kindTS* kinds
	unit      int64     // nanoseconds per count, for kindTSEpoch64 and kindTSEpoch32
	lim       int64     // math.MaxInt64/unit: a count within ±lim cannot overflow
	epochUnit int64     // Mapping.EpochUnit in nanoseconds (0: unset), for text
}

// newTSDecoder returns the decoder of a ts column of type t; epochUnit is
// the nanoseconds of the epoch unit for plain integers, 0 when unset. For a
// column it cannot read it returns a non-empty detail for the error.
func newTSDecoder(t parquet.Type, epochUnit int64) (tsDecoder, string) {
	lt, ct, physical := typeNames(t)
	d := tsDecoder{epochUnit: epochUnit}
	epoch := func(kind valueKind, unit int64) (tsDecoder, string) {
		if unit == 0 {
			return tsDecoder{}, "integer timestamps need an epoch unit (s, ms, us or ns)"
		}
		d = epochDecoder(unit)
		d.kind, d.epochUnit = kind, epochUnit
		return d, ""
	}
	switch t.Kind() {
	case parquet.Int96:
		d.kind = kindTSInt96
		return d, ""
	case parquet.ByteArray:
		switch lt.(type) {
		case nil, *format.StringType:
			d.kind = kindTSText
			return d, ""
		}
	case parquet.Int64:
		switch l := lt.(type) {
		case *format.TimestampType:
			switch l.Unit.Value.(type) {
			case *format.MilliSeconds:
				return epoch(kindTSEpoch64, epochUnitNanos("ms"))
			case *format.MicroSeconds:
				return epoch(kindTSEpoch64, epochUnitNanos("us"))
			case *format.NanoSeconds:
				return epoch(kindTSEpoch64, epochUnitNanos("ns"))
			}
		case nil, *format.IntType:
			switch {
			case ct != nil && *ct == deprecated.TimestampMillis:
				return epoch(kindTSEpoch64, epochUnitNanos("ms"))
			case ct != nil && *ct == deprecated.TimestampMicros:
				return epoch(kindTSEpoch64, epochUnitNanos("us"))
			}
			return epoch(kindTSEpoch64, epochUnit)
		}
	case parquet.Int32:
		switch lt.(type) {
		case *format.DateType:
			d.kind = kindTSDate
			return d, ""
		case nil, *format.IntType:
			if ct != nil && *ct == deprecated.Date {
				d.kind = kindTSDate
				return d, ""
			}
			return epoch(kindTSEpoch32, epochUnit)
		}
	}
	return tsDecoder{}, "cannot read " + physical + " as a timestamp"
}

// epochDecoder returns a decoder of counts of unit nanoseconds since the
// epoch (tsDecoder.epoch), for any reader of integer timestamps.
func epochDecoder(unit int64) tsDecoder {
	return tsDecoder{kind: kindTSEpoch64, unit: unit, lim: math.MaxInt64 / unit}
}

// typeNames returns a column type's logical type (nil for none), its
// converted type (nil for none) and its physical type as errors name it.
func typeNames(t parquet.Type) (format.LogicalTypeValue, *deprecated.ConvertedType, string) {
	var lt format.LogicalTypeValue
	if l := t.LogicalType(); l != nil {
		lt = l.Value
	}
	physical := t.Kind().String()
	if lt != nil {
		physical += " " + lt.String()
	}
	return lt, t.ConvertedType(), physical
}

// decode returns the value as nanoseconds, or the reason it is no valid
// timestamp (ErrNullTimestamp, ErrBadTimestamp, ErrTimestampRange) with
// the raw value as text for the error, a copy. The cell is only filled
// when there is an error.
func (d *tsDecoder) decode(v parquet.Value) (int64, cell, error) {
	if v.IsNull() {
		return 0, cell{null: true}, ErrNullTimestamp
	}
	switch d.kind {
	case kindTSText:
		b := v.ByteArray()
		ns, err := parseTSText(unsafe.String(unsafe.SliceData(b), len(b)), d.epochUnit)
		if err != nil {
			return 0, cell{s: string(b)}, err
		}
		return ns, cell{}, nil
	case kindTSEpoch64, kindTSEpoch32:
		x := v.Int64()
		if d.kind == kindTSEpoch32 {
			x = int64(v.Int32())
		}
		return d.epoch(x).get(d)
	case kindTSDate:
		days := v.Int32()
		ns, ok := fromDate(days)
		if !ok {
			return 0, cell{s: formatSecNsec(int64(days)*secPerDay, 0)}, ErrTimestampRange
		}
		return ns, cell{}, nil
	case kindTSInt96:
		sec, nsec := int96SecNsec(v.Int96())
		ns, ok := fromSecNsec(sec, nsec)
		if !ok {
			return 0, cell{s: formatSecNsec(sec, nsec)}, ErrTimestampRange
		}
		return ns, cell{}, nil
	}
	return 0, cell{}, ErrBadTimestamp
}

// tsCell is one decoded epoch count: ns in nanoseconds when state is tsOK,
// the count v in the column's unit when it is tsRange. The bulk path keeps
// a window of them.
type tsCell struct {
	v, ns int64
	state uint8
}

const (
	tsOK = iota
	tsNull
	tsRange
)

// epoch converts a count of the decoder's unit as fromEpoch does, with a
// plain multiplication when it cannot overflow.
func (d *tsDecoder) epoch(x int64) tsCell {
	if x <= d.lim && x >= -d.lim {
		return tsCell{ns: x * d.unit} // v is only read when state is tsRange
	}
	return d.epochFar(x)
}

// epochFar is epoch for a count that a multiplication might overflow.
func (d *tsDecoder) epochFar(x int64) tsCell {
	ns, ok := fromEpoch(x, d.unit)
	if !ok {
		return tsCell{v: x, state: tsRange}
	}
	return tsCell{v: x, ns: ns}
}

// get returns the count as decode does. An out-of-range count shows in the
// error as the count and its unit, "4611686018427387904 ms".
func (t tsCell) get(d *tsDecoder) (int64, cell, error) {
	switch t.state {
	case tsNull:
		return 0, cell{null: true}, ErrNullTimestamp
	case tsRange:
		return 0, cell{s: strconv.FormatInt(t.v, 10) + " " + unitName(d.unit)}, ErrTimestampRange
	}
	return t.ns, cell{}, nil
}

func unitName(nanos int64) string {
	for _, u := range []string{"s", "ms", "us", "ns"} {
		if epochUnitNanos(u) == nanos {
			return u
		}
	}
	return "?"
}

// parseTSText parses a timestamp written as text: a CSV cell, a Parquet
// string or a partition value, of the event log or of a table. With an
// epoch unit (nanoseconds, 0 for none), a plain integer is a count of that
// unit since the epoch; anything else goes to ParseTimestamp.
func parseTSText(s string, epochUnit int64) (int64, error) {
	if s == "" {
		return 0, ErrNullTimestamp
	}
	if epochUnit != 0 && isInteger(s) { // checked first: a failed ParseInt allocates its error
		if v, err := strconv.ParseInt(s, 10, 64); err == nil {
			ns, ok := fromEpoch(v, epochUnit)
			if !ok {
				return 0, ErrTimestampRange
			}
			return ns, nil
		}
	}
	return parseTimestamp(s)
}

// isInteger reports whether s is an optional sign and one or more ASCII
// digits, the form strconv.ParseInt accepts in base 10.
func isInteger(s string) bool {
	if s != "" && (s[0] == '-' || s[0] == '+') {
		s = s[1:]
	}
	if s == "" {
		return false
	}
	for i := 0; i < len(s); i++ {
		if s[i] < '0' || s[i] > '9' {
			return false
		}
	}
	return true
}
