package synth

// Dealer pages: some real content (stock, services, opening notes) wrapped
// in the boilerplate every page of the same dealer repeats: a navigation
// line, a cookie notice, a "javascript" notice, footer links with privacy
// and terms lines, a copyright line. The boilerplate of a dealer is fixed,
// so it repeats across that dealer's pages exactly as a crawl would see it.

var deckDealerText, deckDealerTitle *deck

// Boilerplate lines, the same on every page of every dealer apart from the
// dealer's name.
var (
	dealerNav = []string{
		"Home | New Boats | Used Boats | Service | Parts | Contact",
		"Home > Boats for Sale > Used > Details",
		"Menu: Stock | Servicing | Storage | About Us | Find Us",
	}
	dealerCookie = []string{
		"This website uses cookies to improve your experience. By continuing to browse you accept our cookie policy.",
		"We use cookies to analyse traffic and remember your preferences. Read our privacy policy to learn more.",
	}
	dealerJS = []string{
		"Please enable JavaScript in your browser to see our full stock list.",
		"This page needs JavaScript turned on to show the photo gallery.",
	}
	dealerFooter = []string{
		"Privacy Policy | Terms of Use | Sitemap | Accessibility",
		"Opening hours: Monday to Saturday, 9am to 5pm. Closed Sundays and bank holidays.",
		"Sign up to our newsletter",
		"Follow us on social media",
	}
)

func setupDealer() {
	deckDealerTitle = newDeck([]string{
		"For sale: {product}", "Servicing at {dealer}", "Winter storage at {town}", "{product} now in stock",
		"Meet the {dealer} workshop team", "Offers on {service} this {month}",
	})
	deckDealerText = newDeck([]string{
		"this {product} was built in {year} and comes with {feature}.",
		"our workshop at {town} offers {service} for all makes, with collection from nearby moorings.",
		"the boat has been kept ashore each winter and shows the care of a single long-term owner.",
		"viewing is by appointment, and we are happy to arrange a short sea trial for serious buyers.",
		"the asking price is {price} pounds, and part exchange will be considered.",
		"all work is carried out by qualified engineers and comes with a twelve month warranty.",
		"we stock parts for the full Larkspur range, including the older {model} hulls.",
		"book your {service} early, as the yard fills up quickly from {month} onwards.",
		"the engine was serviced in {month} and runs sweetly, with full records available.",
		"deck fittings were rebedded last season, and the boat comes with {feature}.",
		"our team has been looking after boats on this coast for more than thirty years.",
		"a full inventory and the most recent survey are available on request.",
		"storage prices include lift-out, pressure washing and a cradle for the season.",
		"we can deliver by road to most places within a day's drive of {town}.",
		"finance may be available to qualifying buyers, subject to status.",
		"please call ahead if you need a slipway slot, as tides limit the times we can launch.",
	})
}

// dealerPage builds one dealer page into g.b.
func (g *gen) dealerPage() {
	di := g.intn(len(dealers))
	g.dealer = dealers[di]
	d := g.dealer
	// Fixed per-dealer boilerplate: indexes come from the dealer, not the
	// random stream, so every page of a dealer carries the same lines.
	g.w(d.name)
	g.nl()
	g.w(dealerNav[di%len(dealerNav)])
	g.nl()
	g.w(dealerCookie[di%len(dealerCookie)])
	g.para()
	g.sentence(g.draw(deckDealerTitle))
	g.para()
	paras := g.between(2, 4)
	for p := 0; p < paras; p++ {
		g.sentences(deckDealerText, g.between(2, 4))
		g.para()
	}
	if g.chance(0.6) {
		g.w(dealerJS[di%len(dealerJS)])
		g.para()
	}
	g.w("Call us on 01632 960")
	g.b = appendPadded(g.b, int64(100+di*37), 3)
	g.w(" or visit us at ")
	g.w(d.town)
	g.w(" boatyard.")
	g.nl()
	for _, f := range dealerFooter {
		g.w(f)
		g.nl()
	}
	g.w("Copyright 2024 ")
	g.w(d.name)
	g.w(". All rights reserved.")
	g.nl()
	g.w(dealerNav[di%len(dealerNav)])
	g.nl()
}
