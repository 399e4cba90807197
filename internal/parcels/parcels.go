// Package parcels generates the shipments table of an invented
// parcel-delivery network: shipments to destination postcodes from sender
// accounts along routes, with a binary target (late delivery) and a
// numeric one (delivery cost) that depend on those high-cardinality
// levels. manyfold's demo, tests and benchmarks use it.
//
// The output is a pure function of the Config apart from BatchRows: the
// same Seed, Stream, Rows and level counts give the same cells whatever the
// batch size. Everything about a level (its text, its popularity rank and
// its effects on the targets) is derived by hashing the level with the
// Seed, so tables generated with the same Seed but different Streams or
// UnseenShare describe the same network and can serve as training and test
// tables for one another.
package parcels

import (
	"fmt"
	"math"

	"manyfold/io/table"
)

// Config describes the table to generate. The zero value of each optional
// field selects its default.
type Config struct {
	// Rows is the number of shipments (at most 2^40).
	Rows int64
	// Seed selects the network: the postcodes, accounts and routes, their
	// popularity and their effects on the targets, and the rows.
	Seed uint64
	// Stream selects an independent sequence of rows over the same network
	// (0..1023). A test table uses the training table's Seed with another
	// Stream so that it holds new shipments of the same network; shipment
	// ids never repeat across streams.
	Stream uint64
	// Postcodes is the number of distinct destination postcodes of the
	// training pool (at most 100000); 0 means 40000.
	Postcodes int
	// Accounts is the number of distinct sender accounts of the training
	// pool; 0 means 200000.
	Accounts int
	// UnseenShare is the share of rows whose postcode, and independently
	// the share whose account, is drawn from a pool disjoint from the
	// training pool, so a model fitted on a table with UnseenShare 0 meets
	// levels it never saw. Use 0 for training data.
	UnseenShare float64
	// BatchRows is the number of rows per batch passed to the writer; 0
	// means 65536.
	BatchRows int
}

// Defaults of the Config fields.
const (
	// DefaultPostcodes is the number of postcodes when Config.Postcodes is 0.
	DefaultPostcodes = 40000
	// DefaultAccounts is the number of accounts when Config.Accounts is 0.
	DefaultAccounts = 200000
	// DefaultBatchRows is the batch size when Config.BatchRows is 0.
	DefaultBatchRows = 65536
)

// Limits of the Config fields.
const (
	maxPostcodes = prefixCount * suffixCount
	maxAccounts  = 50_000_000
	maxBatchRows = 1 << 22
	maxStream    = 1 << 10
	maxRows      = 1 << 40
)

// Column positions in the schema.
const (
	colShipment = iota
	colPostcode
	colAccount
	colRoute
	colType
	colWeight
	colLate
	colCost
	numCols
)

// Schema returns the columns Generate writes, in order: shipment_id,
// dest_postcode (the only nullable column), sender_account, route and
// parcel_type as text, weight_kg as float, late as int (0 or 1) and cost
// as float.
func Schema() *table.Schema {
	return &table.Schema{Fields: []table.Field{
		{Name: "shipment_id", Kind: table.String},
		{Name: "dest_postcode", Kind: table.String, Nullable: true},
		{Name: "sender_account", Kind: table.String},
		{Name: "route", Kind: table.String},
		{Name: "parcel_type", Kind: table.String},
		{Name: "weight_kg", Kind: table.Float64},
		{Name: "late", Kind: table.Int64},
		{Name: "cost", Kind: table.Float64},
	}}
}

// withDefaults fills in the defaults and checks the ranges.
func (cfg Config) withDefaults() (Config, error) {
	if cfg.Postcodes == 0 {
		cfg.Postcodes = DefaultPostcodes
	}
	if cfg.Accounts == 0 {
		cfg.Accounts = DefaultAccounts
	}
	if cfg.BatchRows == 0 {
		cfg.BatchRows = DefaultBatchRows
	}
	switch {
	case cfg.Rows < 0 || cfg.Rows > maxRows:
		return cfg, fmt.Errorf("parcels: rows %d out of range 0..%d", cfg.Rows, int64(maxRows))
	case cfg.Stream >= maxStream:
		return cfg, fmt.Errorf("parcels: stream %d out of range 0..%d", cfg.Stream, maxStream-1)
	case cfg.Postcodes < 0 || cfg.Postcodes > maxPostcodes:
		return cfg, fmt.Errorf("parcels: postcodes %d out of range 1..%d", cfg.Postcodes, maxPostcodes)
	case cfg.Accounts < 0 || cfg.Accounts > maxAccounts:
		return cfg, fmt.Errorf("parcels: accounts %d out of range 1..%d", cfg.Accounts, maxAccounts)
	case cfg.BatchRows < 0 || cfg.BatchRows > maxBatchRows:
		return cfg, fmt.Errorf("parcels: batch rows %d out of range 1..%d", cfg.BatchRows, maxBatchRows)
	case !(cfg.UnseenShare >= 0 && cfg.UnseenShare <= 1):
		return cfg, fmt.Errorf("parcels: unseen share %v out of range 0..1", cfg.UnseenShare)
	case cfg.UnseenShare > 0 && unseenPostcodes(cfg.Postcodes) == 0:
		return cfg, fmt.Errorf("parcels: %d postcodes leave no room for unseen postcodes (use at most %d with an unseen share)",
			cfg.Postcodes, maxPostcodes-prefixCount)
	}
	return cfg, nil
}

// Generate writes cfg.Rows shipments to w in batches of cfg.BatchRows rows
// with the columns of Schema. It does not close w. Setting up the network
// takes memory in proportion to the level counts, not to Rows.
func Generate(cfg Config, w table.Writer) error {
	cfg, err := cfg.withDefaults()
	if err != nil {
		return err
	}
	g := newGenerator(cfg)
	for first := int64(0); first < cfg.Rows; first += int64(cfg.BatchRows) {
		n := int(min(int64(cfg.BatchRows), cfg.Rows-first))
		g.fill(first, n)
		if err := w.Write(&g.batch); err != nil {
			return fmt.Errorf("parcels: writing rows %d to %d: %w", first+1, first+int64(n), err)
		}
	}
	return nil
}

// generator holds the network and the reused batch buffers.
type generator struct {
	nw       *network
	rowBase  uint64
	stream   uint64
	idKeys   [4]uint64
	unseen21 uint64 // UnseenShare as a 21-bit threshold
	batch    table.Batch
}

// drawsPerRow is the number of 64-bit words each row takes from the row
// sequence; row r owns words 8r+1..8r+8, whatever the batching.
const drawsPerRow = 8

// Thresholds of the 21-bit coins.
const (
	coinBits   = 21
	coinMask   = 1<<coinBits - 1
	gramsPerKg = 1000 // weights are rounded to grams
)

var (
	null21     = uint64(math.Round(nullShare * (1 << coinBits)))
	regional16 = uint64(math.Round(regionalShare * (1 << 16)))
)

func newGenerator(cfg Config) *generator {
	g := &generator{
		nw:       newNetwork(cfg.Seed, cfg.Postcodes, cfg.Accounts),
		rowBase:  hashWith(keyFor(cfg.Seed, saltRows), cfg.Stream),
		stream:   cfg.Stream,
		unseen21: uint64(math.Round(cfg.UnseenShare * (1 << coinBits))),
	}
	for k := range g.idKeys {
		g.idKeys[k] = hashWith(keyFor(cfg.Seed, saltShipment), uint64(k))
	}
	n := cfg.BatchRows
	if int64(n) > cfg.Rows {
		n = int(cfg.Rows)
	}
	acWidth := 1 + g.nw.acDigits
	g.batch.Cols = make([]table.Column, numCols)
	cols := g.batch.Cols
	textCol := func(c *table.Column, width int) {
		c.Form = table.FormText
		c.Data = make([]byte, 0, width*n)
		c.Offsets = make([]int32, 0, n+1)
	}
	textCol(&cols[colShipment], idWidth)
	textCol(&cols[colPostcode], 5)
	cols[colPostcode].Nulls = make([]bool, 0, n)
	textCol(&cols[colAccount], acWidth)
	textCol(&cols[colRoute], 5)
	textCol(&cols[colType], 6)
	cols[colWeight] = table.Column{Form: table.FormFloat64, Floats: make([]float64, 0, n)}
	cols[colLate] = table.Column{Form: table.FormInt64, Ints: make([]int64, 0, n)}
	cols[colCost] = table.Column{Form: table.FormFloat64, Floats: make([]float64, 0, n)}
	return g
}

// Shipment ids: "S" and ten base-36 digits of a 50-bit bijection of
// (stream, row); 36^10 > 2^50 so every value fits.
const (
	idWidth    = 11
	idHalfBits = 25
	idHalfMask = 1<<idHalfBits - 1
	base36     = "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ"
)

// shipmentNumber maps stream<<40 | row through a four-round Feistel
// network on 50 bits, a bijection, so ids are unique across rows and
// streams.
func (g *generator) shipmentNumber(row uint64) uint64 {
	x := g.stream<<40 | row
	l, r := x>>idHalfBits&idHalfMask, x&idHalfMask
	for _, k := range g.idKeys {
		l, r = r, l^(mix64(r^k)&idHalfMask)
	}
	return l<<idHalfBits | r
}

// fill generates rows first..first+n-1 into the batch buffers.
func (g *generator) fill(first int64, n int) {
	nw := g.nw
	b := &g.batch
	b.Rows = n
	b.FirstRow = first + 1
	cols := b.Cols
	ids, pcs, acs, rts, tys := &cols[colShipment], &cols[colPostcode], &cols[colAccount], &cols[colRoute], &cols[colType]
	ids.Data, ids.Offsets = ids.Data[:0], append(ids.Offsets[:0], 0)
	pcs.Data, pcs.Offsets, pcs.Nulls = pcs.Data[:0], append(pcs.Offsets[:0], 0), pcs.Nulls[:0]
	acs.Data, acs.Offsets = acs.Data[:0], append(acs.Offsets[:0], 0)
	rts.Data, rts.Offsets = rts.Data[:0], append(rts.Offsets[:0], 0)
	tys.Data, tys.Offsets = tys.Data[:0], append(tys.Offsets[:0], 0)
	weights := cols[colWeight].Floats[:0]
	lates := cols[colLate].Ints[:0]
	costs := cols[colCost].Floats[:0]
	acDigits := nw.acDigits

	var buf [16]byte
	for i := range n {
		row := uint64(first) + uint64(i)
		st := stream{g.rowBase + row*drawsPerRow*gamma}
		coins := st.next()

		// Shipment id.
		num := g.shipmentNumber(row)
		buf[0] = 'S'
		for k := 10; k >= 1; k-- {
			buf[k] = base36[num%36]
			num /= 36
		}
		ids.Data = append(ids.Data, buf[:idWidth]...)
		ids.Offsets = append(ids.Offsets, int32(len(ids.Data)))

		// Destination postcode.
		pool := &nw.pcTrain
		if coins>>coinBits&coinMask < g.unseen21 {
			pool = &nw.pcUnseen
		}
		pcDraw := st.next()
		var pcLate, pcCost float64
		route := -1
		if coins&coinMask < null21 {
			pcs.Nulls = append(pcs.Nulls, true)
			pcLate, pcCost = lateNullEffect, 1.0
		} else {
			lv := pool.sampler.sample(pcDraw)
			pcs.Nulls = append(pcs.Nulls, false)
			pcs.Data = append(pcs.Data, pool.codes[5*lv:5*lv+5]...)
			pcLate, pcCost = pool.late[lv], pool.cost[lv]
			route = int(pool.route[lv])
		}
		pcs.Offsets = append(pcs.Offsets, int32(len(pcs.Data)))

		// Sender account.
		ap := &nw.acTrain
		if coins>>(2*coinBits)&coinMask < g.unseen21 {
			ap = &nw.acUnseen
		}
		acct := ap.number(ap.sampler.sample(st.next()))
		acLate := nw.accountLateRaw(acct) - ap.lateCentre
		acCost := nw.accountCost(acct)
		buf[0] = 'A'
		v := acct
		for k := acDigits; k >= 1; k-- {
			buf[k] = byte('0' + v%10)
			v /= 10
		}
		acs.Data = append(acs.Data, buf[:1+acDigits]...)
		acs.Offsets = append(acs.Offsets, int32(len(acs.Data)))

		// Route: mostly the one serving the destination's region.
		rt := st.next()
		rtDraw := st.next()
		if route < 0 || rt&0xFFFF >= regional16 {
			route = nw.routes.sample(rtDraw)
		}
		buf[0], buf[1], buf[2] = 'R', '-', byte('0'+route/100)
		buf[3], buf[4] = byte('0'+route/10%10), byte('0'+route%10)
		rts.Data = append(rts.Data, buf[:5]...)
		rts.Offsets = append(rts.Offsets, int32(len(rts.Data)))

		// Parcel type.
		tu := uint32(rt >> 32)
		t := 0
		for t < len(parcelTypes)-1 && tu >= nw.typeCum[t] {
			t++
		}
		pt := &parcelTypes[t]
		tys.Data = append(tys.Data, pt.name...)
		tys.Offsets = append(tys.Offsets, int32(len(tys.Data)))

		// Weight, rounded to grams.
		lw := nw.typeMu[t] + pt.logS*gauss4(st.next())
		w := math.Max(1, math.Round(math.Exp(lw)*gramsPerKg)) / gramsPerKg
		weights = append(weights, w)

		// Late delivery.
		logit := lateIntercept + pcLate + acLate + nw.routeLate[route] + pt.late + lateWeightCoef*lw
		late := int64(0)
		if unit53(st.next()) < 1/(1+math.Exp(-logit)) {
			late = 1
		}
		lates = append(lates, late)

		// Cost, rounded to cents.
		c := pt.base + pt.perKg*w + pcCost + nw.routeCost[route] + acCost + 0.8*gauss4(st.next())
		costs = append(costs, math.Max(50, math.Round(c*100))/100)
	}
	cols[colWeight].Floats = weights
	cols[colLate].Ints = lates
	cols[colCost].Floats = costs
}
