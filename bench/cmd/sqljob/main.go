// Command sqljob is the SQL peer of manyfold's performance harness: it
// runs the benchmark job in an embedded DuckDB engine, in a process of its
// own so that its wall time and peak memory are measured like manyfold's.
//
// The job: for each of the columns, the out-of-fold m-estimate of the mean
// target, (s + m*p) / (n + m) with n, s the level's rows and target sum and
// p the mean target, all over the rows of the other folds (the prior p
// alone when the level has no rows there), and the level's row count over
// the whole table; all input columns are kept, and the fold is written as
// column "fold". A null level is a level of its own.
//
// The folds are manyfold's row folds, read from the side file gen writes
// (one int column "fold" in file row order) and joined to the input by
// position; reading it is part of the timed run.
//
//	sqljob --in shipments.parquet --folds folds.parquet --out out.parquet --threads 2
package main

import (
	"database/sql"
	"flag"
	"fmt"
	"os"
	"strings"
	"time"

	_ "github.com/duckdb/duckdb-go/v2" // registers the "duckdb" database/sql driver
)

func main() {
	in := flag.String("in", "", "input table (.parquet or .csv)")
	foldsPath := flag.String("folds", "", "fold side file (Parquet, column fold, in row order)")
	out := flag.String("out", "", "output table (.parquet or .csv)")
	threads := flag.Int("threads", 2, "DuckDB threads")
	target := flag.String("target", "late", "target column")
	cols := flag.String("columns", "dest_postcode,sender_account,shipment_id", "columns to encode")
	m := flag.Float64("m", 20, "m of the m-estimate")
	tmp := flag.String("temp", "", "DuckDB temp directory for spilling (default: next to the output)")
	show := flag.Bool("print", false, "print the SQL and exit")
	explain := flag.Bool("explain", false, "print DuckDB's plan of the query and exit")
	flag.Parse()
	q := jobSQL(*in, *foldsPath, *out, *target, strings.Split(*cols, ","), *m)
	if *show {
		fmt.Println(q)
		return
	}
	if *in == "" || *foldsPath == "" || *out == "" {
		fmt.Fprintln(os.Stderr, "sqljob: --in, --folds and --out are required")
		os.Exit(2)
	}
	if *explain {
		q = "EXPLAIN " + strings.TrimSuffix(strings.TrimPrefix(q[:strings.LastIndex(q, ") TO ")], "COPY ("), "\n")
	}
	if err := run(q, *threads, *tmp, *out, *explain); err != nil {
		fmt.Fprintln(os.Stderr, "sqljob:", err)
		os.Exit(1)
	}
}

func run(q string, threads int, tmp, out string, explain bool) error {
	start := time.Now()
	db, err := sql.Open("duckdb", "")
	if err != nil {
		return err
	}
	defer db.Close()
	db.SetMaxOpenConns(1) // the settings below are per connection
	if tmp == "" {
		tmp = out + ".duckdb-tmp"
	}
	defer os.RemoveAll(tmp)
	for _, s := range []string{
		fmt.Sprintf("SET threads = %d", threads),
		"SET temp_directory = " + quote(tmp),
		"SET preserve_insertion_order = true",
	} {
		if _, err := db.Exec(s); err != nil {
			return fmt.Errorf("%s: %w", s, err)
		}
	}
	if explain {
		rows, err := db.Query(q)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var k, v string
			if err := rows.Scan(&k, &v); err != nil {
				return err
			}
			fmt.Println(v)
		}
		return rows.Err()
	}
	if _, err := db.Exec(q); err != nil {
		return err
	}
	var version string
	db.QueryRow("SELECT version()").Scan(&version)
	fmt.Fprintf(os.Stderr, "sqljob: DuckDB %s, %d threads: wrote %s in %.1fs\n", version, threads, out, time.Since(start).Seconds())
	return nil
}

// quote returns s as an SQL string literal.
func quote(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }

// scan returns the table function reading path.
func scan(path string) string {
	if strings.HasSuffix(path, ".csv") {
		// The same types manyfold infers; postcodes keep their leading zeros.
		return "read_csv(" + quote(path) + `, header = true, columns = {
  'shipment_id': 'VARCHAR', 'dest_postcode': 'VARCHAR', 'sender_account': 'VARCHAR',
  'route': 'VARCHAR', 'parcel_type': 'VARCHAR', 'weight_kg': 'DOUBLE', 'late': 'BIGINT', 'cost': 'DOUBLE'})`
	}
	return "read_parquet(" + quote(path) + ")"
}

// jobSQL returns the COPY statement of the job.
func jobSQL(in, foldsPath, out, target string, cols []string, m float64) string {
	var b strings.Builder
	fmt.Fprintf(&b, "COPY (\nWITH base AS (\n  SELECT t.*, f.fold FROM %s t POSITIONAL JOIN read_parquet(%s) f),\n", scan(in), quote(foldsPath))
	// The prior of fold f: the mean target of the rows of the other folds.
	fmt.Fprintf(&b, `pf AS (SELECT fold, count(%[1]s) AS n, sum(%[1]s)::DOUBLE AS s FROM base GROUP BY fold),
prior AS (SELECT fold, (sum(s) OVER () - s) / (sum(n) OVER () - n)::DOUBLE AS p FROM pf),
`, target)
	for i, c := range cols {
		// Per level and fold: rows and target sum; per level: the totals;
		// out of fold = total minus the fold's own.
		fmt.Fprintf(&b, `g%[1]d AS (SELECT %[2]s AS lvl, fold, count(*) AS rows_lf, count(%[3]s) AS n_lf, sum(%[3]s)::DOUBLE AS s_lf FROM base GROUP BY ALL),
e%[1]d AS (
  SELECT lvl, fold, n, s, freq FROM (
    SELECT lvl, fold,
           (sum(n_lf) OVER w - n_lf)::BIGINT AS n, sum(s_lf) OVER w - s_lf AS s, (sum(rows_lf) OVER w)::BIGINT AS freq
    FROM g%[1]d WINDOW w AS (PARTITION BY lvl)))`, i, c, target)
		if i < len(cols)-1 {
			b.WriteString(",")
		}
		b.WriteString("\n")
	}
	b.WriteString("SELECT base.*")
	for i, c := range cols {
		fmt.Fprintf(&b, `,
  CASE WHEN e%[1]d.n = 0 THEN prior.p ELSE (e%[1]d.s + %[3]v * prior.p) / (e%[1]d.n + %[3]v) END AS %[2]s_tmean,
  e%[1]d.freq AS %[2]s_freq`, i, c, m)
	}
	// LEFT joins: the engine keeps their order (every row finds its level
	// and fold); with inner joins its join-order optimiser, lacking
	// cardinality estimates for the grouped tables, joined them to each
	// other on the fold first and ran for over ten minutes on 1M rows.
	b.WriteString("\nFROM base JOIN prior USING (fold)")
	for i, c := range cols {
		fmt.Fprintf(&b, "\nLEFT JOIN e%[1]d ON e%[1]d.lvl IS NOT DISTINCT FROM base.%[2]s AND e%[1]d.fold = base.fold", i, c)
	}
	format := "parquet, COMPRESSION snappy"
	if strings.HasSuffix(out, ".csv") {
		format = "csv, HEADER true"
	}
	fmt.Fprintf(&b, "\n) TO %s (FORMAT %s)", quote(out), format)
	return b.String()
}
