package dedup

import (
	"math/rand/v2"
	"strings"
)

// testVocab is an invented word bank for synthetic benchmark and test text
// (boatyard vocabulary from the demo scenario plus filler).
var testVocab = strings.Fields(`hull keel rudder bilge pump winch mast boom sheet halyard cleat
transom stern bow deck hatch rigging varnish epoxy gelcoat fiberglass resin sanding primer
antifouling propeller shaft coupling seacock impeller alternator battery wiring bulkhead
stringer chainplate shroud stay turnbuckle fitting bolt washer sealant caulk teak oak cedar
mahogany plank frame rib garboard strake scarf joint fastening bronze stainless galvanized
zinc anode corrosion inspection survey launch haulout cradle trailer mooring anchor chain
rode windlass dinghy outboard engine diesel filter injector coolant thermostat exhaust
manifold gasket the a of and to in is that with for on it as by be this are from at or
larkspur marine works yard crew member season repair maintenance check replace clean tighten
drain flush grease oil spring winter summer storm tide harbor dock slip`)

// randomText returns n words drawn from testVocab, with light punctuation.
func randomText(rng *rand.Rand, n int) string {
	var b strings.Builder
	for i := 0; i < n; i++ {
		if i > 0 {
			b.WriteByte(' ')
		}
		w := testVocab[rng.IntN(len(testVocab))]
		if i%12 == 0 {
			w = strings.ToUpper(w[:1]) + w[1:]
		}
		b.WriteString(w)
		if i%12 == 11 {
			b.WriteByte('.')
		}
	}
	return b.String()
}
