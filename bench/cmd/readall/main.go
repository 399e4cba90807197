// Command readall is the floor of manyfold's performance harness: it reads
// every column of a table with manyfold's readers (manyfold/io/tableio)
// and discards the batches, so its time is the decoding alone.
//
//	readall FILE
package main

import (
	"fmt"
	"io"
	"os"
	"time"

	"manyfold/io/tableio"
)

func main() {
	if len(os.Args) != 2 {
		fmt.Fprintln(os.Stderr, "usage: readall FILE")
		os.Exit(2)
	}
	start := time.Now()
	n, err := readAll(os.Args[1])
	if err != nil {
		fmt.Fprintln(os.Stderr, "readall:", err)
		os.Exit(1)
	}
	fmt.Fprintf(os.Stderr, "readall: %s: %d rows in %.2fs\n", os.Args[1], n, time.Since(start).Seconds())
}

func readAll(path string) (int64, error) {
	r, err := tableio.Open(path, tableio.ReadOptions{})
	if err != nil {
		return 0, err
	}
	defer r.Close()
	var n int64
	for {
		b, err := r.Next()
		if err == io.EOF {
			return n, nil
		}
		if err != nil {
			return n, err
		}
		n += int64(b.Rows)
	}
}
