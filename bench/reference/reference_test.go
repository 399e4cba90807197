// Package reference checks manyfold's encoded columns against the same
// quantities computed independently in SQL by an embedded DuckDB engine.
//
// The test generates a shipments table with manyfold's parcels generator,
// writes it as Parquet, runs the manyfold binary (built from the main
// module) on it, and then recomputes, from the original table joined with
// the fold column manyfold wrote, every row's out-of-fold smoothed target
// mean and every level's frequency. Only the fold assignment is taken from
// manyfold; the statistics, the prior and the formula are SQL's own.
package reference

import (
	"bytes"
	"database/sql"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	_ "github.com/duckdb/duckdb-go/v2" // registers the "duckdb" database/sql driver

	"manyfold/internal/parcels"
	"manyfold/io/tableio"
)

// The table and the encode job under test.
const (
	rows      = 200_000
	dataSeed  = 11 // parcels network and rows
	foldSeed  = 3  // manyfold --seed
	folds     = 5  // manyfold --folds
	smoothM   = 20 // manyfold --methods target:m=20+freq
	foldCol   = "fold"
	idCol     = "shipment_id"
	encodeCol = "dest_postcode,sender_account,route"
)

var encodedCols = strings.Split(encodeCol, ",")

// Tolerances. The binary target's level sums and counts are integers, so
// both sides compute the same floating-point expression from the same
// exact operands; the regression sums add the same doubles in another
// order.
const (
	binaryAbsTol  = 1e-12
	regressRelTol = 1e-9
)

var (
	setupOnce sync.Once
	setupErr  error
	workDir   string // temporary directory shared by the tests
	binPath   string // the manyfold binary
	inputPath string // the generated shipments table
)

func TestMain(m *testing.M) {
	code := m.Run()
	if workDir != "" {
		os.RemoveAll(workDir)
	}
	os.Exit(code)
}

// setup generates the input table and builds the manyfold binary once for
// all tests.
func setup(t *testing.T) {
	t.Helper()
	setupOnce.Do(func() {
		start := time.Now()
		defer func() { t.Logf("setup (generate %d rows, build manyfold): %.1fs", rows, time.Since(start).Seconds()) }()
		workDir, setupErr = os.MkdirTemp("", "manyfold-reference-")
		if setupErr != nil {
			return
		}
		inputPath = filepath.Join(workDir, "shipments.parquet")
		if setupErr = generate(inputPath); setupErr != nil {
			return
		}
		binPath = filepath.Join(workDir, "manyfold")
		setupErr = buildManyfold(binPath)
	})
	if setupErr != nil {
		t.Fatalf("setup: %v", setupErr)
	}
}

// generate writes the parcels table to path as Parquet.
func generate(path string) error {
	out, err := tableio.Create(path, parcels.Schema(), tableio.WriteOptions{})
	if err != nil {
		return err
	}
	if err := parcels.Generate(parcels.Config{Rows: rows, Seed: dataSeed}, out); err != nil {
		out.Abort()
		return err
	}
	return out.Commit()
}

// buildManyfold builds the command from the main module (two directories
// up from this package), so the binary links exactly the dependency
// versions of manyfold's own go.mod, not those of the bench module.
func buildManyfold(bin string) error {
	root, err := filepath.Abs(filepath.Join("..", ".."))
	if err != nil {
		return err
	}
	mod, err := os.ReadFile(filepath.Join(root, "go.mod"))
	if err != nil || !bytes.HasPrefix(mod, []byte("module manyfold\n")) {
		return fmt.Errorf("%s is not manyfold's module root (go.mod: %v)", root, err)
	}
	cmd := exec.Command("go", "build", "-o", bin, "./cmd/manyfold")
	cmd.Dir = root
	if msg, err := cmd.CombinedOutput(); err != nil {
		return fmt.Errorf("go build ./cmd/manyfold in %s: %v\n%s", root, err, msg)
	}
	return nil
}

// encode runs manyfold encode on the input with the given target and
// returns the path of the encoded Parquet table.
func encode(t *testing.T, target string) string {
	t.Helper()
	dir := t.TempDir()
	out := filepath.Join(dir, "encoded.parquet")
	args := []string{"encode", inputPath,
		"--target", target,
		"--columns", encodeCol,
		"--methods", fmt.Sprintf("target:m=%d+freq", smoothM),
		"--folds", fmt.Sprint(folds),
		"--seed", fmt.Sprint(foldSeed),
		"--fold-column", foldCol,
		"--out", out,
		"--tables", filepath.Join(dir, "tables"),
	}
	start := time.Now()
	cmd := exec.Command(binPath, args...)
	if msg, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("manyfold %s: %v\n%s", strings.Join(args, " "), err, msg)
	}
	t.Logf("manyfold encode --target %s: %.1fs", target, time.Since(start).Seconds())
	return out
}

// openDuckDB opens an in-memory DuckDB database with views orig (the
// generated table) and enc (manyfold's output). It fails the test, never
// skips it, when the engine cannot be loaded.
func openDuckDB(t *testing.T, encoded string) *sql.DB {
	t.Helper()
	db, err := sql.Open("duckdb", "")
	if err != nil {
		t.Fatalf("DuckDB cannot be loaded: %v", err)
	}
	t.Cleanup(func() { db.Close() })
	var version string
	if err := db.QueryRow("SELECT version()").Scan(&version); err != nil {
		t.Fatalf("DuckDB cannot be loaded: %v", err)
	}
	t.Logf("DuckDB %s", version)
	for _, v := range []struct{ name, path string }{{"orig", inputPath}, {"enc", encoded}} {
		q := fmt.Sprintf("CREATE VIEW %s AS SELECT * FROM read_parquet(%s)", v.name, quote(v.path))
		if _, err := db.Exec(q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	return db
}

// quote returns s as an SQL string literal.
func quote(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }

// checkShape checks that both tables hold the same rows, keyed by a unique
// shipment id, that manyfold wrote the input columns back unchanged and
// that every fold is a number in 0..folds-1 with rows in it.
func checkShape(t *testing.T, db *sql.DB) {
	t.Helper()
	var n, distinct, joined int64
	if err := db.QueryRow(`SELECT count(*), count(DISTINCT `+idCol+`) FROM orig`).Scan(&n, &distinct); err != nil {
		t.Fatal(err)
	}
	if n != rows || distinct != rows {
		t.Fatalf("input: %d rows, %d distinct shipment ids; want %d of each", n, distinct, rows)
	}
	q := `SELECT count(*) FROM orig o JOIN enc e USING (` + idCol + `)
	      WHERE o.dest_postcode IS NOT DISTINCT FROM e.dest_postcode
	        AND o.sender_account = e.sender_account AND o.route = e.route
	        AND o.late = e.late AND o.cost = e.cost`
	if err := db.QueryRow(q).Scan(&joined); err != nil {
		t.Fatal(err)
	}
	if err := db.QueryRow(`SELECT count(*) FROM enc`).Scan(&n); err != nil {
		t.Fatal(err)
	}
	if n != rows || joined != rows {
		t.Fatalf("output: %d rows, %d matching the input by shipment id with equal columns; want %d", n, joined, rows)
	}
	var minF, maxF, nf, smallest int64
	q = `SELECT min(` + foldCol + `), max(` + foldCol + `), count(DISTINCT ` + foldCol + `),
	            (SELECT min(c) FROM (SELECT count(*) AS c FROM enc GROUP BY ` + foldCol + `))
	     FROM enc`
	if err := db.QueryRow(q).Scan(&minF, &maxF, &nf, &smallest); err != nil {
		t.Fatal(err)
	}
	// Row folds are a hash of the row number: each fold should hold about
	// rows/folds rows; 0.9 of that is far outside the binomial spread.
	if minF != 0 || maxF != folds-1 || nf != folds || smallest < rows/folds*9/10 {
		t.Fatalf("fold column: min %d max %d, %d distinct, smallest fold %d rows; want 0..%d, all %d used, about %d each",
			minF, maxF, nf, smallest, folds-1, folds, rows/folds)
	}
}

// refTMean returns a query giving, for every shipment, manyfold's value of
// <col>_tmean (got) and the reference (ref): with the rows of the other
// folds, (s_c + m*p) / (n_c + m) where n_c and s_c are the level's rows and
// target sum and p is the mean target (m-estimate: Cestnik, ECAI 1990;
// statistics of the other folds: Pargent et al., Computational Statistics
// 37(5), 2022); a level with no rows in the other folds gets p. A null
// level is a level of its own (GROUP BY keeps NULLs together; the join
// uses IS NOT DISTINCT FROM). The column absent tells whether the level
// had no rows in the other folds.
func refTMean(col, target string) string {
	return fmt.Sprintf(`
WITH t AS (
  SELECT o.%[3]s AS id, o.%[1]s AS lvl, CAST(o.%[2]s AS DOUBLE) AS y, e.%[4]s AS fold
  FROM orig o JOIN enc e USING (%[3]s)),
fs AS (SELECT DISTINCT fold AS f FROM t),
other AS (SELECT fs.f, t.lvl, t.y FROM fs JOIN t ON t.fold <> fs.f),
prior AS (SELECT f, sum(y) / count(*) AS p FROM other GROUP BY f),
lv AS (SELECT f, lvl, count(*) AS n, sum(y) AS s FROM other GROUP BY f, lvl)
SELECT t.id,
       CASE WHEN lv.n IS NULL THEN prior.p ELSE (lv.s + %[5]d * prior.p) / (lv.n + %[5]d) END AS ref,
       e.%[1]s_tmean AS got,
       lv.n IS NULL AS absent
FROM t
JOIN prior ON prior.f = t.fold
LEFT JOIN lv ON lv.f = t.fold AND lv.lvl IS NOT DISTINCT FROM t.lvl
JOIN enc e ON e.%[3]s = t.id`, col, target, idCol, foldCol, smoothM)
}

// refFreq returns a query giving, for every shipment, manyfold's <col>_freq
// (got) and the number of rows of its level over the whole table (ref),
// the null level counting the null rows.
func refFreq(col string) string {
	return fmt.Sprintf(`
WITH c AS (SELECT %[1]s AS lvl, count(*) AS n FROM orig GROUP BY %[1]s)
SELECT o.%[2]s AS id, c.n AS ref, e.%[1]s_freq AS got
FROM orig o
JOIN c ON c.lvl IS NOT DISTINCT FROM o.%[1]s
JOIN enc e USING (%[2]s)`, col, idCol)
}

// diffStats summarises a comparison query: the rows compared, the rows
// whose level was absent from the other folds, and the worst row.
type diffStats struct {
	rows, absent       int64
	worst              float64 // largest difference (absolute or relative)
	worstID            string
	worstRef, worstGot float64
}

// compare runs a refTMean query and measures the absolute (relative false)
// or relative difference between ref and got. A NULL or NaN on either
// side counts as an infinite difference.
func compare(t *testing.T, db *sql.DB, query string, relative bool) diffStats {
	t.Helper()
	diff := "abs(ref - got)"
	if relative {
		diff = "abs(ref - got) / greatest(abs(ref), abs(got), 1e-300)"
	}
	q := fmt.Sprintf(`
WITH r AS (%s),
d AS (SELECT id, ref, got, absent,
             CASE WHEN ref IS NULL OR got IS NULL OR isnan(ref) OR isnan(got) THEN 'Infinity'::DOUBLE
                  ELSE %s END AS diff FROM r)
SELECT count(*), count(*) FILTER (WHERE absent), max(diff),
       arg_max(id, diff), arg_max(ref, diff), arg_max(got, diff)
FROM d`, query, diff)
	var s diffStats
	if err := db.QueryRow(q).Scan(&s.rows, &s.absent, &s.worst, &s.worstID, &s.worstRef, &s.worstGot); err != nil {
		t.Fatalf("comparison query: %v", err)
	}
	return s
}

// checkFreq compares every row's <col>_freq with the SQL count, exactly.
func checkFreq(t *testing.T, db *sql.DB, col string) {
	t.Helper()
	q := fmt.Sprintf(`WITH r AS (%s)
SELECT count(*), count(*) FILTER (WHERE got IS DISTINCT FROM ref),
       coalesce(arg_max(id, abs(got - ref)) FILTER (WHERE got IS DISTINCT FROM ref), ''),
       coalesce(arg_max(ref, abs(got - ref)) FILTER (WHERE got IS DISTINCT FROM ref), -1),
       coalesce(arg_max(got, abs(got - ref)) FILTER (WHERE got IS DISTINCT FROM ref), -1)
FROM r`, refFreq(col))
	var n, bad, ref, got int64
	var id string
	if err := db.QueryRow(q).Scan(&n, &bad, &id, &ref, &got); err != nil {
		t.Fatalf("%s_freq comparison query: %v", col, err)
	}
	if n != rows {
		t.Errorf("%s_freq: compared %d rows, want %d", col, n, rows)
	}
	if bad != 0 {
		t.Errorf("%s_freq: %d of %d rows differ from the SQL count (worst: shipment %s, manyfold %d, SQL %d)", col, bad, n, id, got, ref)
	}
}

// checkNullLevel checks that the table does exercise the null level: the
// generator leaves about 1% of the postcodes empty.
func checkNullLevel(t *testing.T, db *sql.DB) {
	t.Helper()
	var nulls int64
	if err := db.QueryRow(`SELECT count(*) FROM orig WHERE dest_postcode IS NULL`).Scan(&nulls); err != nil {
		t.Fatal(err)
	}
	if nulls < rows/200 {
		t.Fatalf("only %d null postcodes; the null level would go untested", nulls)
	}
}

// runCase encodes with the target and compares every encoded column.
func runCase(t *testing.T, target string, relative bool, tol float64) {
	setup(t)
	enc := encode(t, target)
	start := time.Now()
	defer func() { t.Logf("SQL checks: %.1fs", time.Since(start).Seconds()) }()
	db := openDuckDB(t, enc)
	checkShape(t, db)
	checkNullLevel(t, db)
	absent := int64(0)
	for _, col := range encodedCols {
		s := compare(t, db, refTMean(col, target), relative)
		kind := "absolute"
		if relative {
			kind = "relative"
		}
		t.Logf("%s_tmean: %d rows, %d of a level absent from the other folds, max %s difference %.3g",
			col, s.rows, s.absent, kind, s.worst)
		if s.rows != rows {
			t.Errorf("%s_tmean: compared %d rows, want %d", col, s.rows, rows)
		}
		if !(s.worst <= tol) {
			t.Errorf("%s_tmean: max %s difference %.3g > %g at shipment %s: manyfold %.17g, SQL %.17g",
				col, kind, s.worst, tol, s.worstID, s.worstGot, s.worstRef)
		}
		absent += s.absent
		checkFreq(t, db, col)
	}
	// Sender accounts are drawn from a long tail: many appear in one fold
	// only, so the "absent from the other folds gets the prior" branch is
	// exercised.
	if absent == 0 {
		t.Errorf("no row had a level absent from the other folds; the prior branch went untested")
	}
}

// TestBinaryTarget compares the out-of-fold m-estimate of the late rate and
// the level frequencies with DuckDB's.
func TestBinaryTarget(t *testing.T) {
	runCase(t, "late", false, binaryAbsTol)
}

// TestRegressionTarget compares the out-of-fold m-estimate of the mean
// delivery cost and the level frequencies with DuckDB's.
func TestRegressionTarget(t *testing.T) {
	runCase(t, "cost", true, regressRelTol)
}
