package synth

// Forum threads: a title, an opening question and several replies, some
// helpful, some casual. Leaked eval items are planted into one post of a
// thread (see eval.go).

var (
	deckForumTitle, deckForumAsk, deckForumDetail, deckForumAnswer *deck
	deckForumThanks, deckForumChat                                 *deck
)

func setupForum() {
	deckForumTitle = newDeck([]string{
		"{part} keeps failing on my {model}", "Advice needed: {symptom}", "Best {material} for the {part}?",
		"{model} owners, how often do you change the {part}", "Weird problem with the {part}",
		"Is this {defect} on the {part} serious?", "First season with a {engine}, questions",
		"Replacing the {part} myself, worth it?", "Yard quote for the {part} seems steep",
		"Winter jobs list: {part} and {part2}", "Help: {symptom} after lay-up", "Tool recommendation for the {part}",
	})
	deckForumAsk = newDeck([]string{
		"i have a {model} with a {engine} and recently noticed {symptom}.",
		"we bought our {model} last {month} and this is our first season doing our own maintenance.",
		"since the last haul-out there has been {symptom}, and i can't work out where it comes from.",
		"has anyone here replaced the {part} on a {model} without taking the {part2} off first?",
		"the yard says the {part} needs replacing, but it looks fine to me apart from some {defect}.",
		"what do people use on the {part}, plain {material} or something fancier?",
		"i keep the boat at {place} and the {part} seems to wear out every couple of seasons.",
		"is it normal to see {defect} on a {part} that is only two years old?",
		"how tight should the {fastener} on the {part} be if i don't own a torque wrench?",
		"the manual says to check the {part} every {hours} hours, but mine has done far more than that.",
		"does anyone know if the {part} from the {model} fits the older hulls?",
		"i'd rather not pay the yard rate if this is a job i can do on a Saturday.",
		"is there a trick to getting the {part} off, or do i just keep heaving on it?",
		"any recommendations for a decent {tool} that won't cost a fortune?",
		"the surveyor flagged {defect} near the {part} and now the insurer wants it sorted.",
		"what's a fair price for having the {part} replaced at a yard these days?",
		"we're planning a longer trip in {month} and i want the {part} sorted before we go.",
		"should i be worried that the {fluid} level drops a little every few weeks?",
	})
	deckForumDetail = newDeck([]string{
		"it only happens when the engine is warm, never first thing in the morning.",
		"i've already changed the {part2} and cleaned the strainer, so it isn't those.",
		"the boat lives on a swinging mooring, so access is by dinghy and i can't carry much.",
		"photos attached, though the light in the {zone} was terrible.",
		"previous owner left a box of spares but nothing labelled, typical.",
		"there's a bit of {fluid} in the bilge too, which may or may not be related.",
		"i checked the obvious things first, belts and hoses all look okay.",
		"it was fine all summer and started after {weather}.",
		"the engine has about {hours}0 hours on it, which isn't much for a diesel.",
		"my partner thinks i'm overthinking it, but i'd rather know before we cross the bay.",
		"nothing obvious in the manual, it just says to consult a dealer.",
		"it's an older hull, built around {year}, so parts might be hard to find.",
		"i did the same job on a friend's boat last year without any of this drama.",
		"access is awful, you have to lie on your side in the {zone} to reach anything.",
		"the noise goes away when i throttle back, if that helps anyone diagnose it.",
	})
	deckForumAnswer = newDeck([]string{
		"had exactly the same thing on our {model}, it turned out to be the {part} all along.",
		"i'd start with the {part}, they're cheap and it's the usual suspect.",
		"don't overtighten the {fastener}, snug plus a quarter turn is plenty on that fitting.",
		"get a {tool}, it makes the job ten times easier and you'll use it again.",
		"we use {material} on ours and it has lasted four seasons without a problem.",
		"check the hose behind the {part} too, ours had split where you can't see it.",
		"the yard at {place} did ours for a fair price, might be worth a call.",
		"honestly that amount of {defect} is normal, i wouldn't lose sleep over it.",
		"it's a two hour job if the {fastener} come undone, a whole weekend if they don't.",
		"soak everything in penetrating oil the night before, it really does help.",
		"buy two of the {part}, one to fit and one to carry as a spare.",
		"the manual's interval is conservative, but on a salt water boat i'd stick to it.",
		"you can do it without removing the {part2}, you just need small hands and patience.",
		"take lots of photos before you pull anything apart, future you will thank you.",
		"sounds like an air lock, bleed it at the {part} and see if it clears.",
		"if it's weeping rather than dripping you've got time, but don't leave it all season.",
		"whatever you do, close the seacock first, ask me how i know.",
		"a mirror on a stick and a head torch will show you more than any photo.",
		"ours turned out to be a cracked hose clip, cost pennies to fix once we found it.",
		"ring the yard office and ask for the parts list for your hull number, they're helpful.",
		"i'd budget a full day for it the first time, half that once you know the way in.",
		"replace the {fastener} while you're in there, the old ones are never worth saving.",
		"the {material} from the chandlery at {place} is the same stuff at half the price.",
		"have a look at the engine mounts too, soft mounts make everything else shake loose.",
	})
	deckForumThanks = newDeck([]string{
		"thanks all, changed the {part} at the weekend and the problem has gone.",
		"brilliant, that was it, cheers everyone.",
		"update for anyone who finds this later: it was the {part2}, not the {part}.",
		"ordered a {tool} on your advice, will report back.",
		"thanks for the replies, the yard fitted a new {part} in the end.",
		"sorted, and it cost less than a tank of fuel.",
		"cheers for the help, the boat is back in the water and running fine.",
		"quick update: new {part} fitted, sea trial went well, no more {symptom}.",
		"good shout on the hose, it was split right underneath.",
	})
	deckForumChat = newDeck([]string{
		"lol, the joys of boat ownership.",
		"same here, every season there's something.",
		"see you at {place} next month, the bar there does a good pie.",
		"this forum has saved me a fortune over the years.",
		"ha, ours did that too until we gave up and bought a new one.",
		"bump, anyone else seen this?",
		"following, as i've got the same boat.",
		"there's always one more job on the list, isn't there.",
		"we had a similar saga two seasons ago, the cure was patience and penetrating oil.",
		"nice one, glad you got it sorted.",
	})
}

// forumThread builds one thread into g.b. When leak is non-nil its text is
// planted as one post of the thread.
func (g *gen) forumThread(leak []byte) {
	g.sentence(g.draw(deckForumTitle))
	g.para()
	posts := g.between(3, 7)
	leakAt := -1
	if leak != nil {
		leakAt = g.between(1, posts-1)
	}
	for p := 0; p < posts; p++ {
		if p > 0 {
			g.para()
		}
		g.w("Posted by ")
		g.handle()
		g.w(" on ")
		g.num(1, 28)
		g.sp()
		g.w(g.pick(bankMonth))
		g.sp()
		g.num(2016, 2024)
		g.nl()
		switch {
		case p == leakAt:
			g.b = append(g.b, leak...)
		case p == 0:
			g.w(g.pick(bankGreeting))
			g.sp()
			g.sentences(deckForumAsk, g.between(2, 3))
			g.sp()
			g.sentences(deckForumDetail, g.between(1, 3))
			g.sp()
			g.w(g.pick(bankCasual))
		case p == posts-1 && g.chance(0.5):
			g.sentences(deckForumThanks, 1)
			if g.chance(0.5) {
				g.sp()
				g.w(g.pick(bankCasual))
			}
		case g.chance(0.2):
			g.sentences(deckForumChat, 1)
		default:
			g.sentences(deckForumAnswer, g.between(2, 4))
			if g.chance(0.3) {
				g.para()
				g.sentences(deckForumAnswer, g.between(1, 2))
			}
		}
	}
	g.nl()
}
