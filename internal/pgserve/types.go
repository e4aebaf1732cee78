package pgserve

import (
	"encoding/json"
	"fmt"
	"math"
	"math/big"
	"time"

	"github.com/duckdb/duckdb-go/v2"
	"github.com/jackc/pgx/v5/pgtype"
)

// column is one result column: its PostgreSQL type and how a DuckDB value becomes a
// value the pgtype codec of that type can encode.
type column struct {
	name    string
	oid     uint32
	convert func(v any) (any, error)
}

// columnFor maps a DuckDB result type to a PostgreSQL type. Integer widths that
// PostgreSQL lacks go to the next wider type (unsigned 64-bit and 128-bit integers to
// numeric); nested types go to json, carried as JSON text.
func columnFor(name string, t duckdb.Type) column {
	c := column{name: name, oid: pgtype.TextOID, convert: asText}
	switch t {
	case duckdb.TYPE_BOOLEAN:
		c.oid, c.convert = pgtype.BoolOID, same
	case duckdb.TYPE_TINYINT, duckdb.TYPE_SMALLINT, duckdb.TYPE_UTINYINT:
		c.oid, c.convert = pgtype.Int2OID, same
	case duckdb.TYPE_INTEGER, duckdb.TYPE_USMALLINT:
		c.oid, c.convert = pgtype.Int4OID, same
	case duckdb.TYPE_BIGINT, duckdb.TYPE_UINTEGER:
		c.oid, c.convert = pgtype.Int8OID, same
	case duckdb.TYPE_UBIGINT, duckdb.TYPE_HUGEINT, duckdb.TYPE_UHUGEINT, duckdb.TYPE_DECIMAL, duckdb.TYPE_BIGNUM:
		c.oid, c.convert = pgtype.NumericOID, asNumeric
	case duckdb.TYPE_FLOAT:
		c.oid, c.convert = pgtype.Float4OID, same
	case duckdb.TYPE_DOUBLE:
		c.oid, c.convert = pgtype.Float8OID, same
	case duckdb.TYPE_DATE:
		c.oid, c.convert = pgtype.DateOID, same
	case duckdb.TYPE_TIMESTAMP, duckdb.TYPE_TIMESTAMP_S, duckdb.TYPE_TIMESTAMP_MS, duckdb.TYPE_TIMESTAMP_NS:
		c.oid, c.convert = pgtype.TimestampOID, same
	case duckdb.TYPE_TIMESTAMP_TZ:
		c.oid, c.convert = pgtype.TimestamptzOID, same
	case duckdb.TYPE_TIME:
		c.oid, c.convert = pgtype.TimeOID, asTime
	case duckdb.TYPE_INTERVAL:
		c.oid, c.convert = pgtype.IntervalOID, asInterval
	case duckdb.TYPE_BLOB:
		c.oid, c.convert = pgtype.ByteaOID, same
	case duckdb.TYPE_UUID:
		c.oid, c.convert = pgtype.UUIDOID, asUUID
	case duckdb.TYPE_LIST, duckdb.TYPE_ARRAY, duckdb.TYPE_STRUCT, duckdb.TYPE_MAP, duckdb.TYPE_UNION:
		c.oid, c.convert = pgtype.JSONOID, asJSON
	}
	return c
}

// duckTypeFor names the DuckDB type a parameter of a client-declared PostgreSQL type is
// cast to when DuckDB cannot infer the parameter's type itself.
func duckTypeFor(oid uint32) string {
	switch oid {
	case pgtype.BoolOID:
		return "BOOLEAN"
	case pgtype.Int2OID:
		return "SMALLINT"
	case pgtype.Int4OID:
		return "INTEGER"
	case pgtype.Int8OID:
		return "BIGINT"
	case pgtype.Float4OID:
		return "FLOAT"
	case pgtype.Float8OID:
		return "DOUBLE"
	case pgtype.NumericOID:
		return "DECIMAL(38,10)"
	case pgtype.DateOID:
		return "DATE"
	case pgtype.TimestampOID:
		return "TIMESTAMP"
	case pgtype.TimestamptzOID:
		return "TIMESTAMPTZ"
	case pgtype.ByteaOID:
		return "BLOB"
	}
	return "VARCHAR"
}

// paramOIDFor is the PostgreSQL type announced for a parameter DuckDB has typed; 0 when
// DuckDB could not infer one.
func paramOIDFor(t duckdb.Type) uint32 {
	if t == duckdb.TYPE_INVALID || t == duckdb.TYPE_ANY || t == duckdb.TYPE_SQLNULL {
		return 0
	}
	return columnFor("", t).oid
}

func same(v any) (any, error) { return v, nil }

func asText(v any) (any, error) {
	switch v := v.(type) {
	case nil:
		return nil, nil
	case string:
		return v, nil
	case []byte:
		return string(v), nil
	}
	return fmt.Sprint(v), nil
}

func asNumeric(v any) (any, error) {
	switch v := v.(type) {
	case nil:
		return nil, nil
	case duckdb.Decimal:
		return pgtype.Numeric{Int: v.Value, Exp: -int32(v.Scale), Valid: true}, nil
	case *big.Int:
		return pgtype.Numeric{Int: v, Valid: true}, nil
	case uint64:
		return pgtype.Numeric{Int: new(big.Int).SetUint64(v), Valid: true}, nil
	case int64:
		return pgtype.Numeric{Int: big.NewInt(v), Valid: true}, nil
	}
	return nil, fmt.Errorf("numeric column: unexpected value %T", v)
}

func asTime(v any) (any, error) {
	switch v := v.(type) {
	case nil:
		return nil, nil
	case time.Time:
		d := time.Duration(v.Hour())*time.Hour + time.Duration(v.Minute())*time.Minute +
			time.Duration(v.Second())*time.Second + time.Duration(v.Nanosecond())
		return pgtype.Time{Microseconds: d.Microseconds(), Valid: true}, nil
	}
	return nil, fmt.Errorf("time column: unexpected value %T", v)
}

func asInterval(v any) (any, error) {
	switch v := v.(type) {
	case nil:
		return nil, nil
	case duckdb.Interval:
		return pgtype.Interval{Months: v.Months, Days: v.Days, Microseconds: v.Micros, Valid: true}, nil
	}
	return nil, fmt.Errorf("interval column: unexpected value %T", v)
}

func asUUID(v any) (any, error) {
	switch v := v.(type) {
	case nil:
		return nil, nil
	case []byte:
		if len(v) == 16 {
			return pgtype.UUID{Bytes: [16]byte(v), Valid: true}, nil
		}
	case duckdb.UUID:
		return pgtype.UUID{Bytes: [16]byte(v), Valid: true}, nil
	}
	return nil, fmt.Errorf("uuid column: unexpected value %T", v)
}

// asJSON writes a nested DuckDB value as JSON text. Map keys that are not strings make
// the map a list of {"key", "value"} objects, as JSON objects take only string keys.
func asJSON(v any) (any, error) {
	if v == nil {
		return nil, nil
	}
	b, err := json.Marshal(jsonValue(v))
	if err != nil {
		return nil, err
	}
	return string(b), nil
}

func jsonValue(v any) any {
	switch v := v.(type) {
	case []any:
		out := make([]any, len(v))
		for i, e := range v {
			out[i] = jsonValue(e)
		}
		return out
	case map[string]any:
		out := make(map[string]any, len(v))
		for k, e := range v {
			out[k] = jsonValue(e)
		}
		return out
	case duckdb.OrderedMap:
		return jsonMap(&v)
	case *duckdb.OrderedMap:
		return jsonMap(v)
	case duckdb.Union:
		return jsonValue(v.Value)
	case duckdb.Decimal:
		return json.Number(v.String())
	case *big.Int:
		return json.Number(v.String())
	case float64:
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Sprint(v) // JSON has no NaN or infinity
		}
	case float32:
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			return fmt.Sprint(v)
		}
	case time.Time:
		return v.Format("2006-01-02T15:04:05.999999")
	case []byte:
		return string(v)
	case duckdb.Interval:
		return map[string]any{"months": v.Months, "days": v.Days, "micros": v.Micros}
	}
	return v
}

func jsonMap(m *duckdb.OrderedMap) any {
	keys, values := m.Keys(), m.Values()
	obj := make(map[string]any, len(keys))
	for i, k := range keys {
		s, ok := k.(string)
		if !ok {
			pairs := make([]any, len(keys))
			for j := range keys {
				pairs[j] = map[string]any{"key": jsonValue(keys[j]), "value": jsonValue(values[j])}
			}
			return pairs
		}
		obj[s] = jsonValue(values[i])
	}
	return obj
}
