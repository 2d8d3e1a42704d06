package synth

// The mixed crawl ("web" source): spam pages of several kinds, pages in
// German, French and Spanish, and short junk pages. Spam is built to trip
// the published quality and line rules one way each (keyword stuffing,
// repeated lines, symbols, bullet lists, ellipses, placeholder text, code),
// so filter tests can check which rule fires; the kind is recorded in
// TruthDoc.Detail.

// Spam detail names, recorded in TruthDoc.Detail.
const (
	SpamKeywords = "keywords"
	SpamRepeated = "repeated_lines"
	SpamSymbols  = "symbols"
	SpamBullets  = "bullets"
	SpamEllipsis = "ellipsis"
	SpamLorem    = "placeholder_text"
	SpamCode     = "code"
)

var spamKinds = []string{SpamKeywords, SpamRepeated, SpamSymbols, SpamBullets, SpamEllipsis, SpamLorem, SpamCode}

var (
	bankSpamKeyword = []string{
		"cheap", "boat", "parts", "marine", "discount", "best", "price", "impeller", "anchor", "rope",
		"buy", "online", "deals", "outboard", "yacht", "sale", "free", "shipping", "top", "quality",
		"wholesale", "fenders", "cleats", "pumps", "now",
	}
	bankSpamLine = []string{
		"Buy cheap marine parts online today at the best price",
		"Top quality boat parts with free shipping on every order",
		"Click here for the best outboard deals on the coast",
		"Discount anchors and ropes, limited time only",
		"Wholesale fenders and cleats, order now and save big",
	}
	bankSpamTeaser = []string{
		"You will not believe what this boat owner found in his bilge",
		"Ten tricks the yards do not want you to know",
		"This one simple trick stops engines overheating",
		"Read what happened when he changed his impeller",
		"The cheapest way to antifoul your hull is finally here",
		"Owners everywhere are switching to this pump",
		"Find out why your engine keeps stalling",
	}
	loremWords = []string{
		"lorem", "ipsum", "dolor", "sit", "amet", "consectetur", "adipiscing", "elit", "sed", "do",
		"eiusmod", "tempor", "incididunt", "ut", "labore", "et", "dolore", "magna", "aliqua", "enim",
	}
	bankJunk = []string{
		"404 Not Found. The page you requested could not be found on this server.",
		"Loading...",
		"Page 3 of 17. Next page. Previous page.",
		"Log in or register to continue.",
		"Access denied.",
		"Redirecting to the new site, please wait.",
		"Subscribe to our newsletter for the latest offers.",
		"Item added to basket. View basket. Checkout.",
		"Search results for: impeller. No results found.",
		"Error 503. Service temporarily unavailable.",
		"Share this page: Email | Print | Bookmark",
		"Comments are closed.",
	}
)

// spam builds one spam page of the given kind into g.b.
func (g *gen) spam(kind string) {
	switch kind {
	case SpamKeywords:
		lines := g.between(3, 8)
		for l := 0; l < lines; l++ {
			n := g.between(15, 30)
			for i := 0; i < n; i++ {
				if i > 0 {
					g.sp()
				}
				g.w(g.pick(bankSpamKeyword))
			}
			g.nl()
		}
	case SpamRepeated:
		line := g.pick(bankSpamLine)
		n := g.between(10, 30)
		for i := 0; i < n; i++ {
			g.w(line)
			if i%4 == 3 {
				g.w("!!!")
			} else {
				g.wb('!')
			}
			g.nl()
		}
	case SpamSymbols:
		n := g.between(8, 20)
		for i := 0; i < n; i++ {
			g.w("### ")
			g.w(g.pick(bankSpamKeyword))
			g.w(" ### $$$ ")
			g.w(g.pick(bankSpamKeyword))
			g.w(" >>> ")
			g.w(g.pick(bankSpamKeyword))
			g.w(" ... ### ")
			g.num(10, 99)
			g.w("% off ###")
			g.nl()
		}
	case SpamBullets:
		g.w("Our products")
		g.nl()
		n := g.between(12, 30)
		marks := []string{"• ", "- ", "* "}
		m := marks[g.intn(len(marks))]
		for i := 0; i < n; i++ {
			g.w(m)
			g.w(g.pick(bankSpamKeyword))
			g.sp()
			g.w(g.pick(bankPart))
			g.w(", only ")
			g.num(5, 99)
			g.w(" pounds")
			g.nl()
		}
	case SpamEllipsis:
		n := g.between(8, 16)
		for i := 0; i < n; i++ {
			g.w(g.pick(bankSpamTeaser))
			g.w(" and ")
			g.w(g.pick(bankSpamKeyword))
			g.sp()
			g.w(g.pick(bankSpamKeyword))
			g.w("...")
			g.nl()
		}
	case SpamLorem:
		g.w("Welcome to our new marine shop")
		g.para()
		paras := g.between(2, 4)
		for p := 0; p < paras; p++ {
			n := g.between(40, 80)
			for i := 0; i < n; i++ {
				if i > 0 {
					g.sp()
				}
				start := len(g.b)
				g.w(g.pick(loremWords))
				if i == 0 {
					capitalizeAt(g.b, start)
				}
			}
			g.w(".")
			g.para()
		}
	case SpamCode:
		g.w("Please enable JavaScript to use this shop.")
		g.nl()
		g.w("var basket = {items: [], total: 0};")
		g.nl()
		n := g.between(6, 14)
		for i := 0; i < n; i++ {
			g.w("function add")
			g.num(1, 99)
			g.w("(item) { basket.items.push(item); basket.total += item.price; }")
			g.nl()
		}
		g.w("Best ")
		g.w(g.pick(bankPart))
		g.w(" prices online, order now.")
		g.nl()
	}
}

// junk builds a short junk page: a few boilerplate lines, under 50 words.
func (g *gen) junk() {
	n := g.between(1, 3)
	for i := 0; i < n; i++ {
		if i > 0 {
			g.nl()
		}
		g.w(g.pick(bankJunk))
	}
	g.nl()
}

// Foreign-language pages. Noun phrases carry their article in the case the
// template needs, so sentences stay grammatical without agreement logic.
var (
	deNom = []string{
		"der Impeller", "die Bilgepumpe", "das Seeventil", "der Kraftstofffilter", "die Stopfbuchse",
		"der Wärmetauscher", "die Opferanode", "das Ruderlager", "die Propellerwelle", "der Keilriemen",
		"das Abgasknie", "die Lichtmaschine",
	}
	deAcc = []string{
		"den Impeller", "die Bilgepumpe", "das Seeventil", "den Kraftstofffilter", "die Stopfbuchse",
		"den Wärmetauscher", "die Opferanode", "das Ruderlager", "die Propellerwelle", "den Keilriemen",
		"das Abgasknie", "die Lichtmaschine",
	}
	deDat = []string{
		"dem Impeller", "der Bilgepumpe", "dem Seeventil", "dem Kraftstofffilter", "der Stopfbuchse",
		"dem Wärmetauscher", "der Opferanode", "dem Ruderlager", "der Propellerwelle", "dem Keilriemen",
		"dem Abgasknie", "der Lichtmaschine",
	}
	deTitle = []string{
		"Tipps zur Bootspflege im Frühjahr", "Wartung am Motor: unsere Erfahrungen", "Das Boot winterfest machen",
		"Fragen zur Werft und zu den Preisen", "Unser Vereinsboot nach dem Winter",
	}
	frPart = []string{
		"la turbine", "la pompe de cale", "la vanne de coque", "le filtre à carburant", "le presse-étoupe",
		"l'échangeur de chaleur", "l'anode sacrificielle", "la courroie", "l'arbre d'hélice", "le coude d'échappement",
		"le joint", "l'alternateur",
	}
	frTitle = []string{
		"Conseils pour l'entretien du bateau au printemps", "Entretien du moteur : notre expérience",
		"Préparer le bateau pour l'hiver", "Questions sur le chantier et les tarifs", "Notre bateau de club après l'hiver",
	}
	esPart = []string{
		"el impulsor", "la bomba de achique", "la válvula de fondo", "el filtro de combustible", "la bocina",
		"el intercambiador de calor", "el ánodo de zinc", "la correa", "el eje de la hélice", "el codo de escape",
		"la junta", "el alternador",
	}
	esTitle = []string{
		"Consejos para cuidar el barco en primavera", "Mantenimiento del motor: nuestra experiencia",
		"Cómo preparar el barco para el invierno", "Preguntas sobre el astillero y los precios", "Nuestro barco del club después del invierno",
	}
)

var deckDE, deckFR, deckES *deck

func setupForeign() {
	slotTable["de_nom"] = bankSlot(deNom)
	slotTable["de_acc"] = bankSlot(deAcc)
	slotTable["de_dat"] = bankSlot(deDat)
	slotTable["fr_part"] = bankSlot(frPart)
	slotTable["es_part"] = bankSlot(esPart)
	deckDE = newDeck([]string{
		"vor der Arbeit muss das Seeventil geschlossen werden, damit kein Wasser in das Boot läuft.",
		"prüfen Sie {de_acc} regelmäßig auf Risse und Korrosion.",
		"nach dem Winter sollte man {de_acc} gründlich reinigen und mit etwas Fett schützen.",
		"wenn der Motor zu heiß wird, ist oft {de_nom} verschlissen.",
		"die Werft empfiehlt, {de_acc} alle {n} Jahre zu ersetzen.",
		"bei unserem Boot war {de_nom} schon nach zwei Saisons defekt.",
		"ziehen Sie die Schrauben über Kreuz mit {torque} Newtonmeter an.",
		"in unserem Hafen gibt es eine gute Werkstatt für solche Arbeiten.",
		"es ist sinnvoll, ein Ersatzteil an Bord zu haben, weil eine Panne auf See teuer werden kann.",
		"das Wasser in der Bilge kommt häufig von {de_dat} und nicht vom Deck.",
		"wer sein Boot selbst pflegt, spart viel Geld und lernt es besser kennen.",
		"der Ausbau dauert etwa {minutes} Minuten, wenn man das richtige Werkzeug hat.",
		"danach wird der Motor gestartet und die Verbindung auf Lecks geprüft.",
		"achten Sie darauf, dass die Batterie abgeklemmt ist, bevor Sie mit der Arbeit beginnen.",
		"im Frühjahr wird das Unterwasserschiff geschliffen und neu gestrichen.",
		"unser Verein trifft sich jeden Samstag am Steg, um gemeinsam an den Booten zu arbeiten.",
		"die Dichtung sollte weich und glatt sein und darf keine Risse zeigen.",
		"mit einem guten Drehmomentschlüssel lässt sich {de_nom} sicher und ohne Schaden montieren.",
		"leider hat der Händler das passende Teil erst nach drei Wochen geliefert.",
		"bei Fragen hilft Ihnen unser Team in der Werkstatt gerne weiter.",
	})
	deckFR = newDeck([]string{
		"avant de commencer, fermez la vanne et débranchez la batterie.",
		"vérifiez {fr_part} au moins une fois par saison.",
		"il faut remplacer {fr_part} tous les {n} ans, même si la pièce semble encore en bon état.",
		"sur notre bateau, {fr_part} a lâché après deux saisons seulement.",
		"avec une clé dynamométrique, serrez les vis à {torque} newtons-mètres.",
		"si le moteur chauffe, il faut d'abord contrôler {fr_part}.",
		"l'eau dans la cale vient souvent d'un joint usé et non du pont.",
		"le chantier de notre port propose un bon service pour ce genre de travaux.",
		"nettoyez soigneusement {fr_part} puis appliquez une fine couche de graisse.",
		"il est utile de garder une pièce de rechange à bord, car une panne en mer coûte cher.",
		"le démontage prend environ {minutes} minutes avec les bons outils.",
		"ensuite, démarrez le moteur et surveillez les raccords pendant quelques minutes.",
		"au printemps, nous ponçons la coque et nous appliquons une nouvelle couche d'antifouling.",
		"notre club se retrouve chaque samedi sur le ponton pour travailler ensemble sur les bateaux.",
		"le joint doit rester souple et lisse, sans aucune fissure.",
		"les propriétaires qui entretiennent eux-mêmes leur bateau économisent beaucoup d'argent.",
		"malheureusement, le vendeur n'a livré la bonne pièce qu'après trois semaines.",
		"pour toute question, notre équipe de l'atelier est à votre disposition.",
	})
	deckES = newDeck([]string{
		"antes de empezar, cierre la válvula y desconecte la batería.",
		"revise {es_part} por lo menos una vez por temporada.",
		"conviene cambiar {es_part} cada {n} años, aunque la pieza parezca estar bien.",
		"en nuestro barco, {es_part} falló después de solo dos temporadas.",
		"con una llave dinamométrica, apriete los tornillos a {torque} newton metro.",
		"si el motor se calienta, hay que comprobar primero {es_part}.",
		"el agua en la sentina suele venir de una junta gastada y no de la cubierta.",
		"el astillero de nuestro puerto ofrece un buen servicio para este tipo de trabajos.",
		"limpie bien {es_part} y aplique una capa fina de grasa.",
		"es útil llevar un repuesto a bordo, porque una avería en el mar sale cara.",
		"el desmontaje dura unos {minutes} minutos con las herramientas adecuadas.",
		"después, arranque el motor y vigile las conexiones durante unos minutos.",
		"en primavera lijamos el casco y aplicamos una nueva capa de pintura antiincrustante.",
		"nuestro club se reúne cada sábado en el pantalán para trabajar juntos en los barcos.",
		"la junta debe estar blanda y lisa, sin ninguna grieta.",
		"los propietarios que cuidan su propio barco ahorran mucho dinero.",
		"por desgracia, el vendedor no entregó la pieza correcta hasta tres semanas después.",
		"si tiene preguntas, nuestro equipo del taller le ayudará con mucho gusto.",
	})
}

// foreignLangs are the languages of foreign pages, ISO 639-1.
var foreignLangs = []string{"de", "fr", "es"}

// foreign builds a page in lang ("de", "fr" or "es") into g.b.
func (g *gen) foreign(lang string) {
	var d *deck
	switch lang {
	case "de":
		g.w(g.pick(deTitle))
		d = deckDE
	case "fr":
		g.w(g.pick(frTitle))
		d = deckFR
	default:
		g.w(g.pick(esTitle))
		d = deckES
	}
	g.para()
	paras := g.between(2, 4)
	for p := 0; p < paras; p++ {
		if p > 0 {
			g.para()
		}
		g.sentences(d, g.between(3, 5))
	}
	g.nl()
}
