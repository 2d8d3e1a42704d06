package synth

import (
	"strings"
)

// The held-out eval set "hull-qa": questions and answers about hull surveys
// of invented vessels. Its wording is deliberately distinctive: every item
// names an invented vessel, inspector, hull zone and measurement from banks
// used nowhere else in the corpus, and carries a unique survey tag, so a
// document that is not a planted leak shares no 13-word sequence with any
// item (synth_test.go checks this on generated corpora).
//
// Leaks are planted into forum posts in three ways: verbatim, re-cased and
// re-punctuated ("recased"), and paraphrased by word substitution to about
// 80% word overlap ("paraphrase").

// EvalName is the name of the generated eval set.
const EvalName = "hull-qa"

// EvalItem is one question of the eval set, as written to
// Dir/evals/hull-qa.jsonl.
type EvalItem struct {
	ID       string `json:"id"`
	Question string `json:"question"`
	Answer   string `json:"answer"`
}

// Leak kinds recorded in TruthDoc.Leak.
const (
	LeakVerbatim   = "verbatim"
	LeakRecased    = "recased"
	LeakParaphrase = "paraphrase"
)

var leakKinds = []string{LeakVerbatim, LeakRecased, LeakParaphrase}

// Eval-only vocabulary: none of these words occur in the corpus banks.
var (
	evalVessel = []string{
		"Marrowind", "Tessaly Finch", "Quillon Grey", "Brannoch", "Selkie Vane", "Ardent Pell",
		"Corrie Mist", "Halloran Bell", "Wenlow Spray", "Orrin Tide", "Maudlin Swift", "Ebbrook Lass",
		"Cerulean Thorne", "Pellworth", "Siskin Morrow", "Varda Kell",
	}
	evalInspector = []string{
		"Odalys Fenwick", "Thaddeus Quarrie", "Mireille Abernath", "Casimir Dunmore", "Petronel Vask",
		"Isolde Carrow", "Barnaby Tulloch", "Zephrine Oakes", "Lucan Merriday", "Ottoline Garth",
	}
	evalZone = []string{
		"garboard strake", "turn of the bilge", "forefoot", "skeg root", "keel-to-hull joint",
		"transom knee", "chine flat", "boot-top band", "sheer clamp", "hood ends",
	}
	evalMeasure = []struct{ name, unit string }{
		{"laminate moisture percentage", "percent wood-moisture equivalent"},
		{"gelcoat thickness", "microns"},
		{"blister diameter", "millimetres"},
		{"hollow-tap count", "hollow taps per square metre"},
		{"keel bolt stretch", "hundredths of a millimetre"},
		{"barrier coat build", "microns"},
		{"fairing void depth", "millimetres"},
		{"osmotic pH reading", "pH units"},
	}
	evalSeason = []string{"spring", "autumn", "midwinter", "late summer"}
	evalTreat  = []string{
		"a fortnight of dehumidified drying", "peel-and-dry osmosis work", "soda blasting",
		"the second epoxy barrier coat", "a cold-cure fairing pass", "infrared lamp drying",
	}
	evalEvent = []string{
		"the spring relaunch", "the autumn lift-out", "the re-flotation trials", "an insurer's condition survey",
		"the cooperative's annual audit",
	}
)

// evalQuestions and evalAnswers are built by hand-written functions rather
// than templates so they never share the corpus decks.
func (g *gen) evalItem(i int, code int) EvalItem {
	v := g.pick(evalVessel)
	insp := g.pick(evalInspector)
	z := g.pick(evalZone)
	m := evalMeasure[g.intn(len(evalMeasure))]
	t := g.pick(evalTreat)
	e := g.pick(evalEvent)
	var tag strings.Builder
	tag.WriteString("HQ-")
	tag.Write(appendPadded(nil, int64(code), 4))
	val := string(appendDec(nil, g.between(11, 990)))
	var q, a string
	switch g.intn(6) {
	case 0:
		q = "During the " + g.pick(evalSeason) + " haul-out of the " + v + ", which " + m.name + " did " + insp +
			" log at the " + z + " after " + t + "?"
		a = insp + " logged " + val + " " + m.unit + " at the " + z + ", noted on survey tag " + tag.String() + "."
	case 1:
		q = "Why does the hull-qa survey sheet tell inspectors to repeat the " + m.name + " at the " + z +
			" of the " + v + " before " + e + "?"
		a = "The repeat " + m.name + " at the " + z + " confirms the first reading of " + val + " " + m.unit +
			" before the " + v + " is cleared under tag " + tag.String() + "."
	case 2:
		q = "On survey tag " + tag.String() + ", what " + m.name + " was recorded for the " + z + " of the " + v +
			" once " + t + " had finished?"
		a = val + " " + m.unit + " across " + string(appendInt(nil, g.between(4, 24))) + " test points, signed off by " + insp + "."
	case 3:
		q = "What " + m.name + " limit did " + insp + " set for the " + z + " on the " + v + " ahead of " + e +
			" in " + string(appendInt(nil, g.between(2009, 2024))) + "?"
		a = "A limit of " + val + " " + m.unit + ", written beside tag " + tag.String() + " in the " + v + " hull ledger."
	case 4:
		q = "According to the " + v + " hull ledger, how many readings of " + m.name + " were taken along the " + z +
			" after " + t + "?"
		a = string(appendInt(nil, g.between(4, 24))) + " readings, the highest at " + val + " " + m.unit + ", filed by " + insp +
			" under tag " + tag.String() + "."
	default:
		q = "Which " + m.name + " made " + insp + " postpone " + e + " for the " + v + ", and where along the " + z +
			" was it found?"
		a = "A reading of " + val + " " + m.unit + " near the aft end of the " + z + ", recorded on tag " + tag.String() + "."
	}
	return EvalItem{ID: "hull-qa-" + string(appendPadded(nil, int64(i+1), 4)), Question: q, Answer: a}
}

// appendDec appends v tenths as a decimal ("12.5").
func appendDec(b []byte, v int) []byte {
	b = appendPadded(b, int64(v/10), 1)
	return append(b, '.', byte('0'+v%10))
}

// makeEvals builds n eval items with unique survey tags.
func (g *gen) makeEvals(n int) []EvalItem {
	items := make([]EvalItem, n)
	off := g.intn(9000)
	for i := range items {
		// 7919 is prime and coprime to 9000, so tags are unique for n <= 9000.
		code := 1000 + (off+i*7919)%9000
		items[i] = g.evalItem(i, code)
	}
	return items
}

var (
	leakIntro = []string{
		"Our instructor put this one on the practice sheet and nobody got it:",
		"Copying this straight from the study notes for the survey course.",
		"This came up in the yard exam prep, posting it here for anyone revising.",
		"Somebody left the answer key in the workshop, here is one of them.",
		"Question from the course that stumped me at first:",
	}
	leakLead = []string{
		"The answer given was:", "Apparently the answer is:", "Answer in the notes:", "And the official answer:",
	}
	leakOutro = []string{
		"Makes sense once you read it twice.", "Good luck to everyone sitting it this year.",
		"No idea where they get these from.", "Hope that helps someone.",
	}
)

// leakText builds the forum post that carries items in the given leak kind.
func (g *gen) leakText(items []EvalItem, kind string) []byte {
	var b []byte
	b = append(b, g.pick(leakIntro)...)
	for _, it := range items {
		q, a := it.Question, it.Answer
		switch kind {
		case LeakRecased:
			q, a = g.recase(q), g.recase(a)
		case LeakParaphrase:
			q, a = g.paraphrase(q), g.paraphrase(a)
		}
		b = append(b, ' ')
		b = append(b, q...)
		b = append(b, ' ')
		b = append(b, g.pick(leakLead)...)
		b = append(b, ' ')
		b = append(b, a...)
	}
	b = append(b, ' ')
	b = append(b, g.pick(leakOutro)...)
	return b
}

// recase changes letter case and the punctuation attached to words, never
// the words themselves: all lower case without commas and question marks,
// all upper case, or every word capitalised with "?" turned into ".".
func (g *gen) recase(s string) string {
	mode := g.intn(3)
	out := make([]byte, 0, len(s))
	startWord := true
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch mode {
		case 0:
			if c == ',' || c == '?' {
				continue
			}
			if c >= 'A' && c <= 'Z' {
				c += 32
			}
		case 1:
			if c >= 'a' && c <= 'z' {
				c -= 32
			}
			if c == '?' {
				out = append(out, '?', '!')
				continue
			}
		default:
			if startWord && c >= 'a' && c <= 'z' {
				c -= 32
			}
			if c == '?' {
				c = '.'
			}
		}
		out = append(out, c)
		startWord = c == ' '
	}
	return string(out)
}

// paraphraseSyn maps words of the eval templates to substitutes.
var paraphraseSyn = map[string][]string{
	"during": {"throughout"}, "which": {"what"}, "did": {"would"}, "log": {"record", "note"},
	"logged": {"recorded", "noted"}, "after": {"following"}, "why": {"how come"}, "does": {"would"},
	"tell": {"ask", "instruct"}, "inspectors": {"surveyors"}, "repeat": {"redo"}, "before": {"prior to"},
	"confirms": {"checks", "verifies"}, "first": {"initial", "earlier"}, "reading": {"value", "measurement"},
	"cleared": {"approved", "passed"}, "recorded": {"written down", "noted"}, "once": {"after"},
	"finished": {"ended", "completed"}, "across": {"over"}, "test": {"sample"}, "points": {"spots", "locations"},
	"signed": {"ticked"}, "limit": {"threshold", "maximum"}, "set": {"fix", "choose"}, "ahead": {"in advance"},
	"written": {"noted", "entered"}, "beside": {"next to"}, "according": {"going by"},
	"many": {"much"}, "readings": {"measurements", "values"}, "taken": {"made", "collected"},
	"along": {"on"}, "highest": {"largest", "top"}, "filed": {"entered", "lodged"}, "made": {"caused"},
	"postpone": {"delay", "put off"}, "found": {"seen", "detected"}, "near": {"close to", "by"},
	"end": {"part"}, "survey": {"inspection"}, "sheet": {"form"}, "haul-out": {"lift-out"},
	"tag": {"label", "ticket"}, "ledger": {"logbook", "record"}, "under": {"on"}, "noted": {"listed"},
	"where": {"at what spot"}, "what": {"which"}, "how": {"in what number"},
}

// paraphraseShare is the share of words replaced: "about 80% word
// overlap" in the brief.
const paraphraseShare = 0.2

// paraphrase replaces about paraphraseShare of the words of s with
// substitutes from paraphraseSyn (keeping the case of the first letter),
// dropping "the" where too few words have substitutes.
func (g *gen) paraphrase(s string) string {
	ws := strings.Fields(s)
	want := int(float64(len(ws))*paraphraseShare + 0.5)
	var cand, thes []int
	for i, w := range ws {
		k := strings.ToLower(strings.TrimRight(w, ",.?"))
		if _, ok := paraphraseSyn[k]; ok {
			cand = append(cand, i)
		} else if k == "the" && i > 0 {
			thes = append(thes, i)
		}
	}
	g.r.Shuffle(len(cand), func(i, j int) { cand[i], cand[j] = cand[j], cand[i] })
	g.r.Shuffle(len(thes), func(i, j int) { thes[i], thes[j] = thes[j], thes[i] })
	drop := make([]bool, len(ws))
	for n := 0; n < want; n++ {
		switch {
		case len(cand) > 0:
			i := cand[0]
			cand = cand[1:]
			w := ws[i]
			core := strings.TrimRight(w, ",.?")
			tail := w[len(core):]
			syns := paraphraseSyn[strings.ToLower(core)]
			rep := syns[g.intn(len(syns))]
			if core != "" && core[0] >= 'A' && core[0] <= 'Z' {
				rb := []byte(rep)
				capitalizeAt(rb, 0)
				rep = string(rb)
			}
			ws[i] = rep + tail
		case len(thes) > 0:
			drop[thes[0]] = true
			thes = thes[1:]
		}
	}
	var b strings.Builder
	for i, w := range ws {
		if drop[i] {
			continue
		}
		if b.Len() > 0 {
			b.WriteByte(' ')
		}
		b.WriteString(w)
	}
	return b.String()
}
