package csvio_test

import (
	"fmt"
	"io"
	"strings"

	"manyfold/io/csvio"
)

func ExampleNewReader() {
	const shipments = "shipment_id,postcode,route,cost\n" +
		"1,00501,\"R7, Harbour depot\",4.20\n" +
		"2,10115,R2,\n" +
		"3,00501,\"\",3.85\n"
	r, err := csvio.NewReader(strings.NewReader(shipments), "shipments.csv", csvio.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer r.Close()
	for _, f := range r.Schema().Fields {
		fmt.Printf("%s: %v\n", f.Name, f.Kind)
	}
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			fmt.Println(err)
			return
		}
		for i := 0; i < b.Rows; i++ {
			route, cost := &b.Cols[2], &b.Cols[3]
			fmt.Printf("line %d: route %q, cost null %v\n", b.Lines[i], route.Bytes(i), cost.IsNull(i))
		}
	}
	// Output:
	// shipment_id: int
	// postcode: text
	// route: text
	// cost: float
	// line 2: route "R7, Harbour depot", cost null false
	// line 3: route "R2", cost null true
	// line 4: route "", cost null false
}
