// Command check compares two encoded tables of manyfold's performance
// harness value by value in an embedded DuckDB engine, joined by a key
// column: the fold column and every <col>_freq exactly, every <col>_tmean
// within an absolute tolerance, and the row counts.
//
//	check --a manyfold.parquet --b peer.parquet --tol 1e-12
//
// It prints one line per column and exits 1 if any check fails.
package main

import (
	"database/sql"
	"flag"
	"fmt"
	"os"
	"strings"

	_ "github.com/duckdb/duckdb-go/v2" // registers the "duckdb" database/sql driver
)

func main() {
	a := flag.String("a", "", "first table (.parquet or .csv)")
	b := flag.String("b", "", "second table (.parquet or .csv)")
	key := flag.String("key", "shipment_id", "key column joining the tables")
	cols := flag.String("columns", "dest_postcode,sender_account,shipment_id", "encoded columns")
	tol := flag.Float64("tol", 1e-12, "largest absolute difference allowed on the target means")
	flag.Parse()
	ok, err := run(*a, *b, *key, strings.Split(*cols, ","), *tol)
	if err != nil {
		fmt.Fprintln(os.Stderr, "check:", err)
		os.Exit(2)
	}
	if !ok {
		os.Exit(1)
	}
}

func quote(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }

func scan(path, key string) string {
	if strings.HasSuffix(path, ".csv") {
		return fmt.Sprintf("read_csv(%s, header = true, types = {%s: 'VARCHAR', 'dest_postcode': 'VARCHAR'})", quote(path), quote(key))
	}
	return "read_parquet(" + quote(path) + ")"
}

func run(a, b, key string, cols []string, tol float64) (bool, error) {
	db, err := sql.Open("duckdb", "")
	if err != nil {
		return false, err
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	for _, v := range []struct{ name, path string }{{"a", a}, {"b", b}} {
		if _, err := db.Exec(fmt.Sprintf("CREATE VIEW %s AS SELECT * FROM %s", v.name, scan(v.path, key))); err != nil {
			return false, fmt.Errorf("%s: %w", v.path, err)
		}
	}
	var na, nb, joined, foldDiff int64
	if err := db.QueryRow("SELECT (SELECT count(*) FROM a), (SELECT count(*) FROM b)").Scan(&na, &nb); err != nil {
		return false, err
	}
	// One pass over the join computes every difference.
	sel := []string{"count(*)", "count(*) FILTER (WHERE a.fold <> b.fold)"}
	for _, c := range cols {
		sel = append(sel,
			fmt.Sprintf("max(CASE WHEN isnan(a.%[1]s_tmean) OR isnan(b.%[1]s_tmean) THEN 'Infinity'::DOUBLE ELSE coalesce(abs(a.%[1]s_tmean - b.%[1]s_tmean), 'Infinity'::DOUBLE) END)", c),
			fmt.Sprintf("count(*) FILTER (WHERE a.%[1]s_freq IS DISTINCT FROM b.%[1]s_freq)", c))
	}
	q := fmt.Sprintf("SELECT %s FROM a JOIN b USING (%s)", strings.Join(sel, ", "), key)
	dst := []any{&joined, &foldDiff}
	diffs := make([]float64, len(cols))
	freqBad := make([]int64, len(cols))
	for i := range cols {
		dst = append(dst, &diffs[i], &freqBad[i])
	}
	if err := db.QueryRow(q).Scan(dst...); err != nil {
		return false, err
	}
	ok := na == nb && joined == na && foldDiff == 0
	fmt.Printf("rows: %d vs %d, %d joined by %s; fold differs on %d rows\n", na, nb, joined, key, foldDiff)
	for i, c := range cols {
		good := diffs[i] <= tol && freqBad[i] == 0
		ok = ok && good
		verdict := "ok"
		if !good {
			verdict = "FAIL"
		}
		fmt.Printf("%s_tmean max |diff| %.3g (tol %g); %s_freq differs on %d rows: %s\n", c, diffs[i], tol, c, freqBad[i], verdict)
	}
	if ok {
		fmt.Println("check: agree")
	} else {
		fmt.Println("check: DISAGREE")
	}
	return ok, nil
}
