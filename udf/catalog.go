package udf

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/copse-dev/copse/forest"
)

// The catalog: one row per model version, the engine's encoding in a BLOB beside the
// facts copse_models lists. It lives in the database being used, in its own schema.
const (
	catalogSchema = "copse"
	catalogTable  = catalogSchema + ".models"
	// versionTable remembers each name's highest version ever saved, so that a version
	// number is never reused after a drop: an old 'name@3' never names a new model.
	versionTable = catalogSchema + ".model_versions"
)

// ErrNoModel is wrapped by every "model not found" error.
var ErrNoModel = errors.New("model not found")

// Entry is what the catalog knows of one model version besides the model itself.
type Entry struct {
	Name      string
	Version   int
	Method    string
	Task      string
	Target    string
	Rows      int64
	Features  int
	Trees     int
	OOBMetric string  // "" when the method has no out-of-bag estimate
	OOBValue  float64 // NaN when OOBMetric is ""
	CreatedAt time.Time
	SizeBytes int64
	Source    string
	// FeatureTypes is each model feature's source kind at training time, in model
	// feature order ('number', 'boolean', 'date', 'timestamp', 'text', 'enum'; "" when
	// not known); nil for models saved without it.
	FeatureTypes []string
}

// Feature kinds the catalog records, by the source column each feature was trained from.
const (
	featNumber    = "number"
	featBoolean   = "boolean"
	featDate      = "date"
	featTimestamp = "timestamp"
	featText      = "text"
	featEnum      = "enum"
)

// readOnly reports whether the database q reaches was opened read-only.
func readOnly(ctx context.Context, q interface {
	QueryRowContext(context.Context, string, ...any) *sql.Row
}) bool {
	var ro bool
	err := q.QueryRowContext(ctx, "SELECT readonly FROM duckdb_databases() WHERE database_name = current_database()").Scan(&ro)
	return err == nil && ro
}

func (h *Host) createCatalog(ctx context.Context) error {
	// A database opened read-only (copse serve --read-only) keeps the catalog it has:
	// creating or migrating it would fail, and reading and scoring need neither.
	if readOnly(ctx, h.db) {
		return nil
	}
	_, err := h.db.ExecContext(ctx, `
CREATE SCHEMA IF NOT EXISTS `+catalogSchema+`;
CREATE TABLE IF NOT EXISTS `+versionTable+` (
	name         VARCHAR PRIMARY KEY,
	last_version INTEGER NOT NULL
);
CREATE TABLE IF NOT EXISTS `+catalogTable+` (
	name       VARCHAR NOT NULL,
	version    INTEGER NOT NULL,
	method     VARCHAR NOT NULL,
	task       VARCHAR NOT NULL,
	target     VARCHAR NOT NULL,
	rows       BIGINT NOT NULL,
	features   INTEGER NOT NULL,
	trees      INTEGER NOT NULL,
	oob_metric VARCHAR,
	oob_value  DOUBLE,
	created_at TIMESTAMP NOT NULL,
	size_bytes BIGINT NOT NULL,
	source     VARCHAR NOT NULL,
	row_keys   VARCHAR[],
	row_actual VARCHAR[],
	model      BLOB NOT NULL,
	PRIMARY KEY (name, version)
);
ALTER TABLE `+catalogTable+` ADD COLUMN IF NOT EXISTS feature_types VARCHAR[]`)
	if err != nil {
		return fmt.Errorf("udf: create catalog %s: %w", catalogTable, err)
	}
	return nil
}

// modelRef is a parsed model reference: "name" (its latest version) or "name@3".
type modelRef struct {
	name    string
	version int // 0: latest
}

func parseRef(s string) (modelRef, error) {
	i := strings.LastIndex(s, "@")
	if i < 0 {
		if s == "" {
			return modelRef{}, errors.New("model name is empty")
		}
		return modelRef{name: s}, nil
	}
	name, v := s[:i], s[i+1:]
	n, err := strconv.Atoi(v)
	if name == "" || err != nil || n < 1 {
		return modelRef{}, fmt.Errorf("model %q: want 'name' or 'name@version' with a version ≥ 1", s)
	}
	return modelRef{name: name, version: n}, nil
}

func (r modelRef) String() string {
	if r.version == 0 {
		return r.name
	}
	return fmt.Sprintf("%s@%d", r.name, r.version)
}

// validModelName rejects names that could not be referenced back: '@' separates the
// version. Quotes and SQL in names are fine; every query binds them as parameters.
func validModelName(name string) error {
	if name == "" {
		return errors.New("model name is empty")
	}
	if strings.Contains(name, "@") {
		return fmt.Errorf("model name %q holds '@', which separates a version", name)
	}
	return nil
}

// saveModel writes a new version of name in one transaction on a pooled connection and
// returns its entry. keys (the training rows' key values, nil for none; keyNull marks
// the NULL ones, nil when none is) and actuals (their target values as text, nil for
// none) back copse_oob. featureTypes is each feature's source kind, in model feature
// order (nil: not known; "" entries are stored as NULL).
func (h *Host) saveModel(ctx context.Context, name string, m *forest.Model, source string, keys []string, keyNull []bool, actuals []string, featureTypes []string) (Entry, error) {
	blob, err := m.MarshalBinary()
	if err != nil {
		return Entry{}, fmt.Errorf("encode model %q: %w", name, err)
	}
	e := Entry{Name: name, Method: string(m.Method), Task: string(m.Task), Target: m.Target,
		Rows: int64(m.Rows), Features: len(m.Features), Trees: len(m.Trees),
		CreatedAt: time.Now().UTC().Truncate(time.Microsecond), SizeBytes: int64(len(blob)), Source: source}
	var oobMetric, oobValue any
	if name, v, ok := summaryMetric(m); ok {
		e.OOBMetric, e.OOBValue = name, v
		oobMetric, oobValue = e.OOBMetric, e.OOBValue
	}
	var rowKeys, rowKeyNull, rowActual any
	if keys != nil {
		rowKeys = keys
	}
	if keys != nil && keyNull != nil {
		rowKeyNull = keyNull
	}
	if actuals != nil {
		rowActual = actuals
	}
	if featureTypes != nil && len(featureTypes) != len(m.Features) {
		return Entry{}, fmt.Errorf("save model %q: %d feature types for %d features", name, len(featureTypes), len(m.Features))
	}
	var featTypes any
	if featureTypes != nil {
		featTypes = featureTypes
		e.FeatureTypes = featureTypes
	}
	h.saveMu.Lock()
	defer h.saveMu.Unlock()
	tx, err := h.db.BeginTx(ctx, nil)
	if err != nil {
		return Entry{}, fmt.Errorf("save model %q: %w", name, err)
	}
	defer tx.Rollback()
	err = tx.QueryRowContext(ctx, `SELECT greatest(
		coalesce((SELECT max(version) FROM `+catalogTable+` WHERE name = ?), 0),
		coalesce((SELECT last_version FROM `+versionTable+` WHERE name = ?), 0)) + 1`, name, name).Scan(&e.Version)
	if err != nil {
		return Entry{}, fmt.Errorf("save model %q: %w", name, err)
	}
	if _, err := tx.ExecContext(ctx, `INSERT OR REPLACE INTO `+versionTable+` VALUES (?, ?)`, name, e.Version); err != nil {
		return Entry{}, fmt.Errorf("save model %q: %w", name, err)
	}
	// The driver cannot bind a NULL inside a list: NULL keys travel as a mask.
	_, err = tx.ExecContext(ctx, `INSERT INTO `+catalogTable+` VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?,
		CASE WHEN ?::BOOLEAN[] IS NULL THEN ?::VARCHAR[]
		     ELSE list_transform(?::VARCHAR[], (k, i) -> CASE WHEN (?::BOOLEAN[])[i] THEN NULL ELSE k END) END,
		?, ?, CASE WHEN ?::VARCHAR[] IS NULL THEN NULL ELSE list_transform(?::VARCHAR[], t -> nullif(t, '')) END)`,
		e.Name, e.Version, e.Method, e.Task, e.Target, e.Rows, e.Features, e.Trees, oobMetric, oobValue,
		e.CreatedAt, e.SizeBytes, e.Source, rowKeyNull, rowKeys, rowKeys, rowKeyNull, rowActual, blob, featTypes, featTypes)
	if err != nil {
		return Entry{}, fmt.Errorf("save model %q: %w", name, err)
	}
	if _, err := tx.ExecContext(ctx, catalogChanged); err != nil {
		return Entry{}, fmt.Errorf("save model %q: %w", name, err)
	}
	if err := tx.Commit(); err != nil {
		return Entry{}, fmt.Errorf("save model %q: %w", name, err)
	}
	h.resolved.reset()
	return e, nil
}

// catalogChanged runs in every transaction that adds or removes model versions. As
// DDL it moves DuckDB's catalog version on, and DuckDB binds a prepared statement that
// reads this database's tables again before its next execution: copse_score('name', …)
// then resolves 'name' to the version that is latest at that execution, not at prepare.
const catalogChanged = `COMMENT ON TABLE ` + catalogTable + ` IS 'copse models: one row per model version'`

const entryColumns = `name, version, method, task, target, rows, features, trees, oob_metric, oob_value, created_at, size_bytes, source`

func scanEntry(sc interface{ Scan(...any) error }, extra ...any) (Entry, error) {
	var e Entry
	var metric sql.NullString
	var value sql.NullFloat64
	dst := append([]any{&e.Name, &e.Version, &e.Method, &e.Task, &e.Target, &e.Rows, &e.Features, &e.Trees,
		&metric, &value, &e.CreatedAt, &e.SizeBytes, &e.Source}, extra...)
	if err := sc.Scan(dst...); err != nil {
		return Entry{}, err
	}
	e.OOBMetric = metric.String
	e.OOBValue = value.Float64
	if !value.Valid {
		e.OOBValue = nan
	}
	return e, nil
}

// resolve finds the catalog entry a reference names.
func (h *Host) resolve(ctx context.Context, ref string) (Entry, error) {
	r, err := parseRef(ref)
	if err != nil {
		return Entry{}, err
	}
	gen, hit, ok := h.resolved.get(r.String())
	if ok {
		return hit, nil
	}
	e, err := h.lookUp(ctx, r)
	if err == nil {
		h.resolved.put(r.String(), gen, e)
	}
	return e, err
}

// lookUp reads the catalog entry that r names.
func (h *Host) lookUp(ctx context.Context, r modelRef) (Entry, error) {
	q := `SELECT ` + entryColumns + `, feature_types FROM ` + catalogTable + ` WHERE name = ?`
	args := []any{r.name}
	if r.version > 0 {
		q += ` AND version = ?`
		args = append(args, r.version)
	}
	q += ` ORDER BY version DESC LIMIT 1`
	var types any
	e, err := scanEntry(h.db.QueryRowContext(ctx, q, args...), &types)
	if errors.Is(err, sql.ErrNoRows) {
		return Entry{}, fmt.Errorf("%w: %q", ErrNoModel, r.String())
	}
	if err != nil {
		return Entry{}, fmt.Errorf("look up model %q: %w", r.String(), err)
	}
	if list, ok := types.([]any); ok {
		e.FeatureTypes = make([]string, len(list))
		for i, t := range list {
			e.FeatureTypes[i], _ = t.(string) // NULL: not known
		}
	}
	return e, nil
}

// loadModel returns the decoded model a reference names, from the cache when it holds
// that name and version. A new version is a new cache key; copse_drop evicts.
func (h *Host) loadModel(ctx context.Context, ref string) (*forest.Model, Entry, error) {
	e, err := h.resolve(ctx, ref)
	if err != nil {
		return nil, Entry{}, err
	}
	m, err := h.cache.get(e.Name, e.Version, e.CreatedAt, func() (*forest.Model, error) {
		var blob []byte
		err := h.db.QueryRowContext(ctx, `SELECT model FROM `+catalogTable+` WHERE name = ? AND version = ? AND created_at = ?`,
			e.Name, e.Version, e.CreatedAt).Scan(&blob)
		if err != nil {
			return nil, fmt.Errorf("read model %s@%d: %w", e.Name, e.Version, err)
		}
		m, err := forest.Decode(blob)
		if err != nil {
			return nil, fmt.Errorf("model %s@%d: %w", e.Name, e.Version, err)
		}
		return m, nil
	})
	if err != nil {
		return nil, Entry{}, err
	}
	return m, e, nil
}

// rowKeys returns the training rows' keys stored with a model version (nil: none).
func (h *Host) rowKeys(ctx context.Context, e Entry) ([]string, error) {
	return h.rowTexts(ctx, e, "row_keys")
}

// rowActuals returns the training rows' target values, as text (nil: none stored).
func (h *Host) rowActuals(ctx context.Context, e Entry) ([]string, error) {
	return h.rowTexts(ctx, e, "row_actual")
}

// rowTexts reads one of the catalog's per-row text lists; NULL entries read as "".
func (h *Host) rowTexts(ctx context.Context, e Entry, column string) ([]string, error) {
	out, _, err := h.rowTextsNull(ctx, e, column)
	return out, err
}

// rowTextsNull is rowTexts that also reports which entries are NULL (nil: none is).
func (h *Host) rowTextsNull(ctx context.Context, e Entry, column string) ([]string, []bool, error) {
	var raw any
	err := h.db.QueryRowContext(ctx, `SELECT `+column+` FROM `+catalogTable+` WHERE name = ? AND version = ?`, e.Name, e.Version).Scan(&raw)
	if err != nil {
		return nil, nil, fmt.Errorf("read %s of %s@%d: %w", column, e.Name, e.Version, err)
	}
	if raw == nil {
		return nil, nil, nil
	}
	list, ok := raw.([]any)
	if !ok {
		return nil, nil, fmt.Errorf("read %s of %s@%d: unexpected %T", column, e.Name, e.Version, raw)
	}
	out := make([]string, len(list))
	var null []bool
	for i, k := range list {
		if s, ok := k.(string); ok {
			out[i] = s
		} else {
			if null == nil {
				null = make([]bool, len(list))
			}
			null[i] = true
		}
	}
	return out, null, nil
}

// dropModel deletes what a reference names — every version for a bare name — and
// returns how many versions went.
func (h *Host) dropModel(ctx context.Context, ref string) (int, error) {
	r, err := parseRef(ref)
	if err != nil {
		return 0, err
	}
	q := `DELETE FROM ` + catalogTable + ` WHERE name = ?`
	args := []any{r.name}
	if r.version > 0 {
		q += ` AND version = ?`
		args = append(args, r.version)
	}
	tx, err := h.db.BeginTx(ctx, nil)
	if err != nil {
		return 0, fmt.Errorf("drop model %q: %w", ref, err)
	}
	defer tx.Rollback()
	res, err := tx.ExecContext(ctx, q, args...)
	if err != nil {
		return 0, fmt.Errorf("drop model %q: %w", ref, err)
	}
	n, _ := res.RowsAffected()
	if n == 0 {
		return 0, fmt.Errorf("%w: %q", ErrNoModel, ref)
	}
	if _, err := tx.ExecContext(ctx, catalogChanged); err != nil {
		return 0, fmt.Errorf("drop model %q: %w", ref, err)
	}
	if err := tx.Commit(); err != nil {
		return 0, fmt.Errorf("drop model %q: %w", ref, err)
	}
	h.resolved.reset()
	h.cache.evict(r.name, r.version)
	return int(n), nil
}

// listModels returns every model version, by name then version.
func (h *Host) listModels(ctx context.Context) ([]Entry, error) {
	rows, err := h.db.QueryContext(ctx, `SELECT `+entryColumns+` FROM `+catalogTable+` ORDER BY name, version`)
	if err != nil {
		return nil, fmt.Errorf("list models: %w", err)
	}
	defer rows.Close()
	var out []Entry
	for rows.Next() {
		e, err := scanEntry(rows)
		if err != nil {
			return nil, fmt.Errorf("list models: %w", err)
		}
		out = append(out, e)
	}
	return out, rows.Err()
}

// modelCache keeps decoded models by name and version; concurrent loads of one key decode
// once.
type modelCache struct {
	mu      sync.Mutex
	entries map[cacheKey]*cacheEntry
}

// cacheKey names one saved model. created tells apart two models saved under one name
// and version: the catalog reuses a version number once its rows are gone (a copse_drop
// of the latest version, or rows deleted by hand, which evicts nothing).
type cacheKey struct {
	name    string
	version int
	created int64 // created_at, microseconds since the epoch
}

type cacheEntry struct {
	once  sync.Once
	model *forest.Model
	err   error
}

func (c *modelCache) get(name string, version int, created time.Time, load func() (*forest.Model, error)) (*forest.Model, error) {
	c.mu.Lock()
	if c.entries == nil {
		c.entries = map[cacheKey]*cacheEntry{}
	}
	k := cacheKey{name, version, created.UnixMicro()}
	e := c.entries[k]
	if e == nil {
		e = &cacheEntry{}
		c.entries[k] = e
	}
	c.mu.Unlock()
	e.once.Do(func() { e.model, e.err = load() })
	if e.err != nil {
		c.mu.Lock()
		if c.entries[k] == e {
			delete(c.entries, k) // let a later call try again
		}
		c.mu.Unlock()
	}
	return e.model, e.err
}

// evict drops a version (0: every version) of name.
func (c *modelCache) evict(name string, version int) {
	c.mu.Lock()
	defer c.mu.Unlock()
	for k := range c.entries {
		if k.name == name && (version == 0 || k.version == version) {
			delete(c.entries, k)
		}
	}
}

// resolveCache keeps catalog look-ups by reference ('name' or 'name@3'), so that
// scoring a few rows does not query the catalog each time (a look-up took most of a
// one-row copse_score). Every save and drop through the host empties it, after its
// commit. The catalog is written only through copse's functions; a row changed by hand
// in copse.models is seen after the next save or drop.
type resolveCache struct {
	mu      sync.Mutex
	gen     uint64
	entries map[string]Entry
}

// get returns the cached entry of ref (ok), or the generation to hand to put after
// looking it up.
func (c *resolveCache) get(ref string) (gen uint64, e Entry, ok bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	e, ok = c.entries[ref]
	return c.gen, e, ok
}

// put keeps e for ref, unless a save or drop came between the look-up and now.
func (c *resolveCache) put(ref string, gen uint64, e Entry) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if gen != c.gen {
		return
	}
	if c.entries == nil || len(c.entries) >= 1024 {
		c.entries = map[string]Entry{}
	}
	// A clone: ref may point into a DuckDB vector (a zero-copy string argument) whose
	// bytes change once the chunk is done, which would corrupt the map.
	c.entries[strings.Clone(ref)] = e
}

// reset forgets every entry.
func (c *resolveCache) reset() {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.gen++
	c.entries = nil
}
