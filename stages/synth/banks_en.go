package synth

// English word banks of the invented Larkspur Marine Works scenario. Every
// entry is written for this package; model names, dealers, people and
// places are invented.

var (
	bankPart = []string{
		"raw water impeller", "fuel filter", "bilge pump", "stern gland", "through-hull fitting",
		"seacock", "exhaust elbow", "heat exchanger", "zinc anode", "rudder bearing",
		"propeller shaft", "cutless bearing", "alternator belt", "shift cable", "steering cable",
		"trim tab", "keel bolt", "chainplate", "winch drum", "lower gudgeon",
		"water pump housing", "fuel injector", "thermostat", "raw water strainer", "gearbox oil seal",
		"deck hatch seal", "mast step", "bow roller", "anchor windlass", "bilge float switch",
		"fuel lift pump", "oil cooler", "mixing elbow", "shaft coupling", "engine mount",
		"cockpit drain", "freshwater pump", "holding tank vent", "battery isolator", "starter solenoid",
		"glow plug", "primary fuel separator", "transmission dipstick", "rudder stock", "tiller head",
		"stanchion base", "genoa track", "boom vang", "traveller car", "outboard bracket",
	}
	bankTool = []string{
		"torque wrench", "socket set", "feeler gauge", "multimeter", "putty knife",
		"heat gun", "hook pick", "strap wrench", "impeller puller", "grease gun",
		"wire brush", "orbital sander", "inspection mirror", "pair of long-nose pliers", "flashlight",
		"hose clamp driver", "oil extractor pump", "hydrometer", "moisture meter", "dial indicator",
		"set of hex keys", "soft-faced mallet", "caulking gun", "scraper with a carbide blade", "bearing puller",
	}
	bankMaterial = []string{
		"marine sealant", "epoxy filler", "antifouling paint", "gelcoat paste", "silicone grease",
		"medium-strength thread locker", "two-part polyurethane", "fairing compound", "waterproof grease", "anti-seize paste",
		"butyl tape", "polysulphide bedding compound", "light machine oil", "dielectric grease", "barrier coat primer",
	}
	bankFastener = []string{
		"bolts", "machine screws", "hose clamps", "nuts", "studs", "cap screws", "retaining pins", "self-tapping screws",
	}
	bankFluid = []string{
		"engine oil", "coolant", "gear oil", "diesel", "hydraulic steering fluid", "raw water", "fresh water", "fuel",
	}
	bankDefect = []string{
		"hairline cracks", "green corrosion", "pitting", "chafe marks", "blisters", "side play",
		"weeping at the seams", "swollen rubber", "white salt crust", "loose strands", "discoloured paint", "scoring",
	}
	bankZone = []string{
		"engine compartment", "lazarette", "bilge", "cockpit locker", "forepeak", "saloon floor",
		"aft cabin", "anchor locker", "quarter berth", "transom", "chart table locker", "galley cabinet",
	}
	bankSystem = []string{
		"Raw Water Cooling", "Fuel Delivery", "Bilge and Drainage", "Steering Gear", "Shaft and Propeller",
		"Electrical Charging", "Deck Hardware", "Exhaust", "Fresh Water Supply", "Rig and Chainplates",
		"Hull Fittings", "Engine Controls",
	}
	bankModel = []string{
		"Tern 28", "Tern 32", "Osprey 24", "Osprey 30", "Kittiwake 36", "Fulmar 41",
		"Petrel 22", "Shearwater 34", "Gannet 27", "Skua 38", "Dunlin 19", "Curlew 31",
	}
	bankEngine = []string{
		"two-cylinder diesel", "three-cylinder diesel", "four-cylinder diesel", "saildrive unit",
		"inboard petrol engine", "long-shaft outboard", "shaft-drive diesel",
	}
	bankSectionTitle = []string{
		"Overview", "Before You Start", "Removal", "Inspection", "Refitting", "Adjustment",
		"Routine Care", "Troubleshooting", "Winter Lay-Up", "Recommissioning", "Parts and Materials", "Testing After Service",
	}
	bankConnector = []string{
		"First, ", "Next, ", "After that, ", "Then ", "Once this is done, ", "At this point, ",
		"With that finished, ", "Now ", "When you are ready, ", "Afterwards, ",
	}
	bankAdjCare = []string{
		"carefully", "slowly", "evenly", "gently", "firmly", "a little at a time",
	}
	bankWeather = []string{
		"a cold spell", "a wet autumn", "a long hot summer", "heavy spring rain", "a week of hard frost", "a season in tropical water",
	}
	bankCrew = []string{
		"the owner", "the yard team", "a second person", "the skipper", "the engineer on duty", "whoever does the work",
	}
)

// Forum vocabulary.
var (
	bankHandleA = []string{
		"salty", "rusty", "old", "keel", "bilge", "tide", "harbour", "weekend", "slow", "wet",
		"stern", "dockside", "foggy", "windward", "coastal", "tiller",
	}
	bankHandleB = []string{
		"dog", "sailor", "skipper", "rat", "hand", "rigger", "wrench", "gull", "pilot", "mechanic",
		"cruiser", "mate", "tinkerer", "drifter", "builder", "bosun",
	}
	bankGreeting = []string{
		"Hi all,", "Hey folks,", "Evening everyone,", "Morning all,", "Hello,", "Quick one,",
		"Long time reader, first post.", "Hoping someone can help.", "Right then,", "Hi,",
	}
	bankCasual = []string{
		"Cheers.", "Thanks in advance!", "Any ideas?", "lol.", "Fingers crossed.", "Ta.",
		"Much appreciated.", "Sorry for the long post.", "Watch this space.", "Happy sailing!",
	}
	bankMonth = []string{
		"January", "February", "March", "April", "May", "June", "July", "August", "September", "October", "November", "December",
	}
	bankSymptom = []string{
		"a squeal on start-up", "a drip under the engine", "low water flow from the exhaust", "a burning smell",
		"a knocking noise at idle", "white smoke when cold", "the alarm going off at cruising revs", "a stiff wheel",
		"water in the bilge every morning", "a flat battery after two days", "a clunk when shifting into reverse",
		"fuel starvation after an hour", "a vibration above two thousand revs", "a weep around the shaft",
	}
	bankPlace = []string{
		"Harrow Creek", "Gullmouth", "Saltings Reach", "Fennick Bay", "Otterpool marina", "Larkspur Quay",
		"Westmere pontoons", "Kestle harbour", "Brackwater quay", "the north basin",
	}
)

// Dealer vocabulary: invented dealers with their own boilerplate.
type dealerInfo struct {
	name, domain, town string
}

var dealers = []dealerInfo{
	{"Harrow Creek Boat Sales", "harrowcreekboats.example", "Harrow Creek"},
	{"Gullmouth Marine Supply", "gullmouthmarine.example", "Gullmouth"},
	{"Saltings Reach Chandlery", "saltingschandlery.example", "Saltings Reach"},
	{"Fennick Bay Yacht Brokers", "fennickyachts.example", "Fennick Bay"},
	{"Otterpool Outboards", "otterpooloutboards.example", "Otterpool"},
	{"Kestle Harbour Marine", "kestlemarine.example", "Kestle"},
	{"Brackwater Boatworks", "brackwaterboatworks.example", "Brackwater"},
	{"Westmere Marine Centre", "westmeremarine.example", "Westmere"},
}

var (
	bankProduct = []string{
		"Tern 28 cruiser", "Osprey 24 day boat", "Kittiwake 36 ketch", "Petrel 22 dinghy cruiser",
		"used Fulmar 41", "Gannet 27 fishing boat", "Curlew 31 motor sailer", "Dunlin 19 launch",
	}
	bankService = []string{
		"engine servicing", "antifouling and hull cleaning", "rigging inspections", "winter storage",
		"electrical fault finding", "osmosis treatment", "sail repairs", "outboard overhauls",
		"cutless bearing replacement", "pre-purchase surveys",
	}
	bankFeature = []string{
		"a rebuilt engine", "new standing rigging", "a fresh coat of antifouling", "a full cover",
		"updated electronics", "a serviced heads", "new cushions", "a folding propeller", "a road trailer",
		"twin batteries with a smart charger",
	}
)

// Vocabulary used by near-copy edits: ordinary words that fit in running
// text without adding punctuation.
var bankEdit = []string{
	"really", "also", "usually", "often", "simply", "always", "certainly", "quite", "rather", "just",
	"boat", "yard", "part", "job", "work", "water", "engine", "season", "owner", "hull",
	"small", "new", "old", "clean", "good", "careful", "extra", "second", "spare", "common",
	"check", "keep", "fit", "move", "test", "hold", "turn", "pull", "set", "run",
}
