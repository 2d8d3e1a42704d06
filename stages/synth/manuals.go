package synth

// Repair manuals: long, well-formed English prose. A manual has a title,
// an introduction and several sections; procedures are written as
// sentences, either joined by sequence words in a paragraph or as
// "Step N." lines. Templates are drawn without replacement inside one
// manual so a manual does not repeat its own sentences.

func registerSlots() {
	for name, b := range map[string][]string{
		"part": bankPart, "part2": bankPart, "tool": bankTool, "material": bankMaterial,
		"fastener": bankFastener, "fluid": bankFluid, "defect": bankDefect, "zone": bankZone,
		"model": bankModel, "engine": bankEngine, "care": bankAdjCare, "weather": bankWeather,
		"crew": bankCrew, "symptom": bankSymptom, "place": bankPlace, "month": bankMonth,
		"product": bankProduct, "service": bankService, "feature": bankFeature,
	} {
		slotTable[name] = bankSlot(b)
	}
	slotTable["system"] = func(g *gen) { g.lowerAppend(g.pick(bankSystem)) }
	slotTable["n"] = func(g *gen) { g.num(2, 8) }
	slotTable["torque"] = func(g *gen) { g.num(12, 95) }
	slotTable["mm"] = func(g *gen) { g.dec(2, 40) }
	slotTable["hours"] = func(g *gen) { g.num(2, 20); g.w("0") }
	slotTable["months"] = func(g *gen) { g.num(3, 24) }
	slotTable["temp"] = func(g *gen) { g.num(60, 95) }
	slotTable["bar"] = func(g *gen) { g.dec(5, 45) }
	slotTable["minutes"] = func(g *gen) { g.num(5, 45) }
	slotTable["year"] = func(g *gen) { g.num(1979, 2022) }
	slotTable["price"] = func(g *gen) { g.num(4, 95); g.w(","); g.num(100, 999) }
	slotTable["user"] = func(g *gen) { g.handle() }
	slotTable["dealer"] = func(g *gen) { g.w(g.dealer.name) }
	slotTable["town"] = func(g *gen) { g.w(g.dealer.town) }
}

// lowerAppend appends s with ASCII letters lower-cased.
func (g *gen) lowerAppend(s string) {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c >= 'A' && c <= 'Z' {
			c += 32
		}
		g.b = append(g.b, c)
	}
}

// handle appends a forum user name such as "saltyrigger42".
func (g *gen) handle() {
	g.w(g.pick(bankHandleA))
	if g.chance(0.3) {
		g.wb('_')
	}
	g.w(g.pick(bankHandleB))
	if g.chance(0.7) {
		g.num(1, 99)
	}
}

var (
	deckManualDesc, deckManualProc, deckManualSafety, deckManualCheck *deck
	deckManualTrouble, deckManualInterval                             *deck
)

func setupManuals() {
	deckManualDesc = newDeck([]string{
		"the {part} on the {model} sits in the {zone} and can be reached once the access panel is lifted.",
		"on boats fitted with a {engine}, the {part} is mounted low on the port side of the block.",
		"this section explains how the {part} works, what wears out first, and how to service it without lifting the engine.",
		"most owners will service the {part} once a season, and the job takes about {minutes} minutes with ordinary hand tools.",
		"the {system} system on the {model} was redesigned in {year}, so older hulls may differ from the drawings shown here.",
		"a healthy {part} runs quietly, shows no {defect}, and needs no more than a light film of {material} to stay that way.",
		"water that collects around the {part} is the usual cause of {defect} on boats kept in salt water all year.",
		"the {part} is connected to the {part2} by a short run of reinforced hose held with two stainless {fastener}.",
		"because the {zone} is cramped, plan the work so that you only have to climb in and out a few times.",
		"the yard recommends genuine parts, although any fitting of the same size and rating will do the job.",
		"if the boat has been ashore for {months} months, expect the {part} to be stiff until it has been worked a few times.",
		"damage to the {part} rarely happens all at once; it builds slowly, which is why regular inspection pays off.",
		"owners who keep a simple log of each service find it much easier to spot a part that is wearing faster than expected.",
		"the drawings in this manual show the {model}, but the layout on sister hulls is close enough to follow.",
		"on later hulls the {part} was moved forward by a few centimetres, which makes the {tool} easier to use.",
		"there is no need to remove the {part2} for this job, although doing so gives a better view of the {part}.",
		"after {weather}, it is worth looking at the {part} even if the boat has not been used.",
		"the original {fastener} on the {part} are bronze, and replacements should match them to avoid galvanic corrosion.",
		"a worn {part} can let water reach the {zone}, so treat any sign of {defect} as a reason to act soon.",
		"the factory settings for the {part} are printed on a plate inside the {zone}, next to the hull number.",
		"expect the first service to take longer than later ones, because old sealant and paint have to be cleared away.",
		"with the correct spares on board, a competent owner can finish this work on a single weekend.",
	})
	deckManualProc = newDeck([]string{
		"close the seacock and drain the {fluid} into a clean container before you loosen the {part}.",
		"remove the {n} {fastener} that hold the cover, keeping them in a tray so none are lost in the {zone}.",
		"ease the {part} out of its housing with the {tool}, working {care} so the seat is not scratched.",
		"clean the mating faces with a {tool} and wipe them dry with a lint-free cloth.",
		"apply a thin bead of {material} to the flange, keeping it clear of the inner edge.",
		"fit the new {part} and turn it by hand until it seats fully against the housing.",
		"tighten the {fastener} in a cross pattern to {torque} newton metres, using the {tool}.",
		"open the seacock again and watch the joint for at least {minutes} minutes before closing the {zone}.",
		"disconnect the battery at the isolator so nothing can start while your hands are near the {part}.",
		"mark the position of the {part} with a paint pen before removing it, so it goes back the same way.",
		"slacken the {part2} just enough to give the {part} room to move, without taking it off completely.",
		"measure the clearance with a {tool}; it should be no more than {mm} millimetres.",
		"spin the shaft slowly by hand and listen for any rough spots as the {part} turns.",
		"bleed the air from the system by opening the small screw on top of the {part} until clear {fluid} appears.",
		"refill the {fluid} to the upper mark on the dipstick, then run the engine at idle for {minutes} minutes.",
		"lay a towel in the {zone} to catch drips, since even a small spill of {fluid} makes the floor slippery.",
		"unscrew the {part} anticlockwise; if it will not move, apply penetrating oil and wait ten minutes.",
		"press the new seal into place with a socket of the right size, tapping it {care} with a soft-faced mallet.",
		"coat the threads with {material} and start each of the {fastener} by hand to avoid cross-threading.",
		"photograph the wiring around the {part} before you unplug anything, so the connections can be restored.",
		"lift the {part} clear and inspect the underside for {defect} before you decide whether it can be reused.",
		"set the gap to {mm} millimetres and lock it with the small nut on the adjuster.",
		"pump the bilge dry so you can see where fresh water appears once the {part} is back in service.",
		"run the engine in gear against the mooring lines for {minutes} minutes and check the temperature stays below {temp} degrees.",
		"replace the cover, tighten its {fastener} {care}, and record the date in the maintenance log.",
		"sand the area around the {part} back to sound laminate, then vacuum away all of the dust.",
		"warm the old sealant with a heat gun until it softens, and peel it away with a plastic scraper.",
		"support the {part} with a block of wood while the last of the {fastener} is removed.",
		"check the hose for {defect} along its whole length and replace it if the rubber feels hard.",
		"test the {part} by switching it on and off several times while watching the gauge.",
		"ask {crew} to turn the wheel from lock to lock while you watch the {part} from below.",
		"wipe off any excess {material} before it cures, since hardened residue is difficult to remove later.",
		"fit a new sacrificial anode if the old one has lost more than half of its original size.",
		"torque the final pair of {fastener} only after the sealant has been allowed to rest for an hour.",
	})
	deckManualSafety = newDeck([]string{
		"never work on the {part} while the engine is running or the battery switch is on.",
		"wear eye protection when using the {tool}, because old paint and corrosion can flake off without warning.",
		"keep a fire extinguisher within reach whenever {fluid} is exposed in the {zone}.",
		"make sure the boat is properly supported on its cradle before you climb underneath the hull.",
		"ventilate the {zone} well, since the fumes from {material} build up quickly in a closed space.",
		"do not open the cooling system while it is hot, as the pressure can spray scalding liquid.",
		"dispose of used {fluid} at the yard collection point and never pour it into the harbour.",
		"tell {crew} what you are doing before you close a seacock, so nobody runs the engine by mistake.",
		"gloves protect your hands from sharp edges around the {part}, and they also keep grease off the upholstery.",
		"if you are unsure about any step, stop and ask the yard office for advice before going further.",
		"a small leak below the waterline can sink a boat overnight, so check your work before leaving the boat unattended.",
		"lift heavy parts with your legs rather than your back, and get help for anything over twenty kilograms.",
	})
	deckManualCheck = newDeck([]string{
		"look closely at the {part} for {defect}, paying most attention to the areas near the {fastener}.",
		"the {part} should move freely by hand, with no binding and no more than a trace of side play.",
		"a reading above {bar} bar on the gauge suggests that the {part} is partly blocked.",
		"hold an inspection mirror behind the {part} to see the back face, where {defect} often starts.",
		"compare the old {part} with the new one; a difference of more than {mm} millimetres means it was overdue.",
		"run a finger along the seal lip, which should feel smooth and soft rather than cracked or glazed.",
		"if the {fluid} looks milky, water has got into it and the cause must be found before refilling.",
		"tap the laminate around the {part} with the handle of a screwdriver and listen for a dull sound.",
		"check that the {fastener} have not been overtightened, which can crush the backing plate.",
		"the belt should deflect about ten millimetres under firm thumb pressure midway between the pulleys.",
		"use the {tool} to confirm the readings, because a visual check alone can miss early {defect}.",
		"note the condition of the {part} in the log, even when nothing needs doing this season.",
	})
	deckManualTrouble = newDeck([]string{
		"if the engine overheats soon after this service, the most likely cause is an air lock in the {part}.",
		"a steady drip from the {part} usually means the seal was seated unevenly and needs refitting.",
		"when {symptom} appears after the work, recheck the alignment of the {part} before anything else.",
		"should the {part} refuse to turn, remove it again and look for a burr on the housing.",
		"weak flow at the exhaust points to a blocked strainer or a worn {part}, in that order.",
		"if the alarm sounds at idle but not under load, check the wiring to the sender beside the {part}.",
		"a high-pitched whine that rises with engine speed is normally the {part} running dry.",
		"where corrosion returns within a season, the bonding wire to the {part} may be broken.",
		"if the {fastener} keep working loose, fit new lock washers and a drop of thread locker.",
		"repeated failure of the {part} often has its cause elsewhere, such as a bent shaft or a soft engine mount.",
		"water in the {zone} after heavy rain is more often a deck leak than a failure of the {part}.",
		"if none of these checks finds the fault, the yard can test the {part} on the workshop bench.",
	})
	deckManualInterval = newDeck([]string{
		"inspect the {part} every {hours} engine hours or once a season, whichever comes first.",
		"replace the {part} every {months} months even if it still looks serviceable, as the rubber ages from the inside.",
		"change the {fluid} at every lay-up, so the engine does not sit for the winter with old oil in it.",
		"grease the {part} monthly during the season with a few strokes of the grease gun.",
		"carry a spare {part} on board, because a failure offshore is much harder to deal with.",
		"the service interval may be doubled for boats kept in fresh water and used only at weekends.",
		"have a surveyor look at the {part} every five years as part of a full out-of-water survey.",
		"renew the {material} around the {part} whenever it starts to crack or lift at the edges.",
	})
	manualParas = [6]struct {
		d *deck
		n int
	}{{deckManualDesc, 4}, {deckManualProc, 7}, {deckManualProc, 6}, {deckManualCheck, 5}, {deckManualTrouble, 4}, {deckManualInterval, 2}}
}

// manual builds one repair manual into g.b. Paragraph kinds are chosen
// among those whose decks still have unused templates, so no sentence
// template repeats inside one manual and the manual passes the published
// repetition limits; the manual ends when its sections are written or the
// decks run dry.
func (g *gen) manual() {
	g.w("Larkspur Marine Works Service Manual: ")
	g.w(g.pick(bankModel))
	g.w(", ")
	g.w(g.pick(bankSystem))
	g.w(" System")
	g.para()
	g.sentences(deckManualDesc, g.between(3, 5))
	g.para()
	sections := g.between(4, 8)
	titleOrder := g.r.Perm(len(bankSectionTitle))
	for s := 0; s < sections; s++ {
		if g.paragraphKinds() == 0 {
			break
		}
		g.w("Section ")
		g.b = appendInt(g.b, s+1)
		g.w(". ")
		g.w(bankSectionTitle[titleOrder[s%len(titleOrder)]])
		g.para()
		paras := g.between(1, 3)
		for p := 0; p < paras; p++ {
			nk := g.paragraphKinds()
			if nk == 0 {
				break
			}
			switch g.kinds[g.intn(nk)] {
			case 0:
				g.sentences(deckManualDesc, g.between(2, 4))
				g.sp()
				g.sentences(deckManualSafety, 1)
			case 1:
				g.procedure()
			case 2:
				g.steps()
			case 3:
				g.sentences(deckManualCheck, g.between(3, 5))
			case 4:
				g.sentences(deckManualTrouble, g.between(2, 4))
			default:
				g.sentences(deckManualInterval, g.between(1, 2))
				if g.left(deckManualDesc) >= 3 {
					g.sp()
					g.sentences(deckManualDesc, g.between(1, 3))
				}
			}
			g.para()
		}
	}
	g.sentences(deckManualSafety, min(2, max(g.left(deckManualSafety), 1)))
	g.nl()
}

// manualParas lists the manual's paragraph kinds with the deck each draws
// from and the most sentences it can take from it.
var manualParas = [6]struct {
	d *deck
	n int
}{}

// paragraphKinds fills g.kinds with the paragraph kinds whose decks still
// have enough unused templates and returns how many there are.
func (g *gen) paragraphKinds() int {
	nk := 0
	for k, need := range manualParas {
		if g.left(need.d) >= need.n && (k != 0 || g.left(deckManualSafety) >= 1) {
			g.kinds[nk] = k
			nk++
		}
	}
	return nk
}

// procedure appends a paragraph of steps joined by sequence words.
func (g *gen) procedure() {
	n := g.between(4, 7)
	order := g.r.Perm(len(bankConnector))
	for i := 0; i < n; i++ {
		if i > 0 {
			g.sp()
		}
		start := len(g.b)
		switch {
		case i == n-1:
			g.w("Finally, ")
		case i == 0 || g.chance(0.6):
			g.w(bankConnector[order[i%len(order)]])
		}
		g.expand(g.draw(deckManualProc))
		capitalizeAt(g.b, start)
	}
}

// steps appends numbered step lines, one sentence each.
func (g *gen) steps() {
	n := g.between(3, 6)
	for i := 0; i < n; i++ {
		if i > 0 {
			g.nl()
		}
		g.w("Step ")
		g.b = appendInt(g.b, i+1)
		g.w(". ")
		g.sentence(g.draw(deckManualProc))
	}
}

func appendInt(b []byte, v int) []byte {
	if v < 10 {
		return append(b, byte('0'+v))
	}
	return appendPadded(b, int64(v), 1)
}
