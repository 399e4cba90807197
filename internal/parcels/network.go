package parcels

import (
	"math"
)

// Salts separate the hash functions that derive the network from the seed.
const (
	saltPrefixPerm = iota + 1
	saltSuffix
	saltPrefixLate
	saltPrefixCost
	saltPostcodeLate
	saltPostcodeCost
	saltRegionRoute
	saltAccountLate
	saltAccountCost
	saltAccountPerm
	saltRouteLate
	saltRouteCost
	saltRows
	saltShipment
)

// Shape of the invented network.
const (
	prefixCount   = 1000 // three-digit region prefixes 000..999
	suffixCount   = 100  // two-digit suffixes within a prefix
	postcodesPer  = 40   // aimed-at postcodes per prefix
	routeCount    = 200
	accountDigits = 7 // minimum digits after "A"

	postcodeZipf = 1.1
	accountZipf  = 1.05
	routeZipf    = 0.6

	nullShare     = 0.01 // share of rows with no destination postcode
	regionalShare = 0.7  // share of rows whose route is their region's route
)

// Effects on the logit of late delivery.
const (
	lateIntercept  = -2.17
	latePrefixSD   = 0.6
	latePostcodeSD = 0.5
	lateAccountSD  = 0.6
	lateRouteSD    = 0.3
	lateNullEffect = 0.4 // deliveries without a postcode run late more often
	lateWeightCoef = 0.15
)

// parcelTypes lists the parcel types with their share of shipments, the
// log-normal weight parameters (median kg and log spread), their effect on
// the logit of late delivery and the tariff (base and per kg).
var parcelTypes = [...]struct {
	name           string
	share          float64
	medianKg, logS float64
	late           float64
	base, perKg    float64
}{
	{"letter", 0.25, 0.08, 0.6, -0.4, 1.20, 2.00},
	{"small", 0.30, 0.8, 0.5, 0, 3.50, 0.90},
	{"medium", 0.22, 3.5, 0.45, 0.1, 5.50, 0.60},
	{"large", 0.12, 12, 0.4, 0.3, 9.00, 0.45},
	{"pallet", 0.04, 250, 0.5, 0.6, 40.00, 0.12},
	{"cold", 0.07, 6, 0.5, 0.5, 12.00, 0.80},
}

// postcodePool is one pool of destination postcodes (the training pool or
// the disjoint unseen pool), indexed by Zipf rank.
type postcodePool struct {
	sampler *zipf
	codes   []byte    // 5 bytes per level
	late    []float64 // prefix effect + own effect on the logit, centred
	cost    []float64 // region surcharge + own surcharge
	route   []int16   // the route serving the level's region
}

// accountPool is one pool of sender accounts, indexed by Zipf rank: rank r
// has account number base + (mul*r + add) mod size.
type accountPool struct {
	sampler        *zipf
	base, mul, add uint64
	size           uint64
	lateCentre     float64 // Zipf-weighted mean of the raw late effect
}

// network is everything derived from the seed and the level counts: the
// levels, their text and their effects. It holds O(postcodes) values and
// a fixed amount for accounts, whatever their number.
type network struct {
	kAccLate  uint64 // hash keys of the account effects
	kAccCost  uint64
	pcTrain   postcodePool
	pcUnseen  postcodePool
	acTrain   accountPool
	acUnseen  accountPool
	acDigits  int
	routes    *zipf
	routeLate [routeCount]float64
	routeCost [routeCount]float64
	typeCum   [len(parcelTypes)]uint32 // cumulative shares as 32-bit thresholds
	typeMu    [len(parcelTypes)]float64
}

// postcodeLayout gives the number of region prefixes used and the number of
// suffix slots the training pool takes in each.
func postcodeLayout(postcodes int) (groups, perGroup int) {
	groups = int(math.Round(float64(postcodes) / postcodesPer))
	groups = max(1, min(groups, prefixCount))
	perGroup = (postcodes + groups - 1) / groups
	return groups, perGroup
}

// unseenPostcodes is the size of the unseen postcode pool: the suffix slots
// the training pool leaves free in its prefixes, at most as many as the
// training pool.
func unseenPostcodes(postcodes int) int {
	groups, per := postcodeLayout(postcodes)
	return min(groups*(suffixCount-per), postcodes)
}

func newNetwork(seed uint64, postcodes, accounts int) *network {
	nw := &network{kAccLate: keyFor(seed, saltAccountLate), kAccCost: keyFor(seed, saltAccountCost)}
	h := func(salt, x uint64) uint64 { return hashWith(keyFor(seed, salt), x) }

	// Region prefixes: the first groups entries of a seeded shuffle of
	// 000..999; suffixes within a prefix: an affine bijection of 0..99.
	groups, per := postcodeLayout(postcodes)
	perm := make([]int, prefixCount)
	for i := range perm {
		perm[i] = i
	}
	rs := stream{keyFor(seed, saltPrefixPerm)}
	for i := len(perm) - 1; i > 0; i-- {
		j := rs.intn(i + 1)
		perm[i], perm[j] = perm[j], perm[i]
	}
	suffixMul := [...]int{1, 3, 7, 9, 11, 13, 17, 19, 21, 23, 27, 29, 31, 33, 37, 39}
	mul := suffixMul[keyFor(seed, saltSuffix)%uint64(len(suffixMul))]
	prefixLate := make([]float64, groups)
	prefixCost := make([]float64, groups)
	prefixRoute := make([]int16, groups)
	for g := range groups {
		p := uint64(perm[g])
		prefixLate[g] = latePrefixSD * gauss4(h(saltPrefixLate, p))
		prefixCost[g] = 1.2 * math.Abs(gauss4(h(saltPrefixCost, p)))
		prefixRoute[g] = int16(h(saltRegionRoute, p) % routeCount)
	}
	// fill lays out a pool: rank i sits in prefix slot i mod groups and
	// suffix slot firstSlot + i/groups.
	fill := func(pool *postcodePool, n, firstSlot int) {
		pool.sampler = newZipf(n, postcodeZipf)
		pool.codes = make([]byte, 5*n)
		pool.late = make([]float64, n)
		pool.cost = make([]float64, n)
		pool.route = make([]int16, n)
		centre := 0.0
		for i := range n {
			g, j := i%groups, firstSlot+i/groups
			p := perm[g]
			off := h(saltSuffix, uint64(p)) % suffixCount
			sfx := (mul*j + int(off)) % suffixCount
			code := uint64(p*suffixCount + sfx)
			c := pool.codes[5*i : 5*i+5]
			v := int(code)
			for k := 4; k >= 0; k-- {
				c[k] = byte('0' + v%10)
				v /= 10
			}
			pool.late[i] = prefixLate[g] + latePostcodeSD*gauss4(h(saltPostcodeLate, code))
			pool.cost[i] = prefixCost[g] + 0.4*gauss4(h(saltPostcodeCost, code))
			pool.route[i] = prefixRoute[g]
			centre += pool.sampler.prob(i) * pool.late[i]
		}
		for i := range pool.late {
			pool.late[i] -= centre
		}
	}
	fill(&nw.pcTrain, postcodes, 0)
	if u := unseenPostcodes(postcodes); u > 0 {
		fill(&nw.pcUnseen, u, per)
	}

	// Accounts: the training pool numbers 0..accounts-1, the unseen pool
	// accounts..2*accounts-1, each scrambled by an affine bijection.
	nw.acDigits = max(accountDigits, len(itoa(uint64(2*accounts-1))))
	sampler := newZipf(accounts, accountZipf)
	for k, pool := range []*accountPool{&nw.acTrain, &nw.acUnseen} {
		pool.sampler = sampler
		pool.size = uint64(accounts)
		pool.base = uint64(k * accounts)
		hp := h(saltAccountPerm, uint64(k))
		pool.mul = coprime(hp|1, pool.size)
		pool.add = mix64(hp) % pool.size
		// Centre on the weighted mean over the sampler's head ranks; the
		// tail adds a mean-zero sum of many tiny terms, left out so that
		// setting up does not take time in proportion to the accounts.
		centre := 0.0
		for r := range min(accounts, headRanks) {
			centre += sampler.prob(r) * nw.accountLateRaw(pool.number(r))
		}
		pool.lateCentre = centre
	}

	nw.routes = newZipf(routeCount, routeZipf)
	for r := range routeCount {
		nw.routeLate[r] = lateRouteSD * gauss4(h(saltRouteLate, uint64(r)))
		nw.routeCost[r] = 0.5 * gauss4(h(saltRouteCost, uint64(r)))
	}
	acc := 0.0
	for t, pt := range parcelTypes {
		acc += pt.share
		nw.typeCum[t] = uint32(math.Min(acc*(1<<32), 1<<32-1))
		nw.typeMu[t] = math.Log(pt.medianKg)
	}
	nw.typeCum[len(parcelTypes)-1] = 1<<32 - 1
	return nw
}

// number returns the account number of rank r.
func (p *accountPool) number(r int) uint64 {
	return p.base + (p.mul*uint64(r)+p.add)%p.size
}

// accountLateRaw is the uncentred late effect of an account number.
func (nw *network) accountLateRaw(num uint64) float64 {
	return lateAccountSD * gauss4(hashWith(nw.kAccLate, num))
}

// accountCost is the tariff adjustment of an account number: a discount
// for some accounts.
func (nw *network) accountCost(num uint64) float64 {
	return -0.6 * math.Abs(gauss4(hashWith(nw.kAccCost, num)))
}

// coprime returns the first value at or above a (modulo n) that is coprime
// with n.
func coprime(a, n uint64) uint64 {
	a %= n
	for gcd(a, n) != 1 {
		a = (a + 1) % n
	}
	return a
}

func gcd(a, b uint64) uint64 {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}

func itoa(v uint64) string {
	var b [20]byte
	i := len(b)
	for {
		i--
		b[i] = byte('0' + v%10)
		v /= 10
		if v == 0 {
			break
		}
	}
	return string(b[i:])
}
