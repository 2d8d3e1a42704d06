package filters

import (
	"net/netip"
	"sort"
	"strings"
)

// Redaction is best effort, not a guarantee. What it finds:
//
//   - e-mail addresses with an ASCII local part and an ASCII domain whose
//     last label is at least two letters (internationalized addresses and
//     obfuscated forms such as "name at example dot com" are missed);
//   - IPv4 addresses in dotted decimal (each part 0-255, no leading
//     zeros), not glued to other digits, dots or letters; a four-part
//     version number such as "1.2.3.4" is indistinguishable and is
//     redacted too;
//   - IPv6 addresses that net/netip parses, with at least two colons and a
//     decimal digit (so "std::map" and "12:30:45" are left alone; a hex
//     word pair like "dead::beef" is missed);
//   - phone-number-like strings: 7 to 15 digits in groups separated by
//     single spaces, dashes or dots, optionally with a leading "+" and a
//     bracketed area code. A bare digit run counts only after "+". Dates
//     (2021-03-04, 04.03.2021), two groups of four digits (year ranges
//     such as 1990-2000) and numbers grouped in thousands (12 500 000)
//     are not redacted; as a
//     consequence phone numbers written in groups of three after a short
//     first group ("912 345 678") are missed.

// Default placeholders of Redact.
const (
	EmailPlaceholder = "<EMAIL>"
	IPPlaceholder    = "<IP>"
	PhonePlaceholder = "<PHONE>"
)

// RedactOptions selects what Redact replaces and with what.
type RedactOptions struct {
	Email, IP, Phone                                  bool
	EmailPlaceholder, IPPlaceholder, PhonePlaceholder string
}

// DefaultRedactOptions redacts all three kinds with the default
// placeholders.
func DefaultRedactOptions() RedactOptions {
	return RedactOptions{Email: true, IP: true, Phone: true,
		EmailPlaceholder: EmailPlaceholder, IPPlaceholder: IPPlaceholder, PhonePlaceholder: PhonePlaceholder}
}

// RedactResult is the redacted text and the number of replacements of
// each kind. Text is the input itself when nothing was found.
type RedactResult struct {
	Text             string
	Email, IP, Phone int
}

// Redaction kinds, in the order their spans are claimed.
const (
	kindEmail = iota
	kindIP
	kindPhone
)

type span struct{ start, end, kind int }

// maxRedactPasses bounds the passes of Redact. The default placeholders
// hold no byte any finder takes ('<' and '>' end every token), so each
// pass turns raw text into inert placeholders and two passes are the
// usual most; the bound guards custom placeholders that are not inert.
const maxRedactPasses = 8

// Redact replaces e-mail addresses, IP addresses and phone-number-like
// strings in text (see the package notes above for what is and is not
// found). E-mail spans are found first, then IP addresses, then phone
// numbers; a later kind never overlaps an earlier one, and overlapping
// spans of one kind are joined. A finder judges a candidate by its
// neighbours, and a placeholder is a new neighbour ("x@ab.cd-1.2.3.4":
// the IP goes first, then "x@ab.cd" is an address), so Redact runs again
// on its own output until a pass finds nothing: with the default
// placeholders, Redact of the result finds nothing and changes nothing.
func Redact(text string, opt RedactOptions) RedactResult {
	res := RedactResult{Text: text}
	for pass := 0; pass < maxRedactPasses; pass++ {
		out, found := redactOnce(res.Text, opt, &res)
		if !found {
			break
		}
		res.Text = out
	}
	return res
}

// redactOnce finds and replaces spans in one pass, adding to the counts
// in res; found is false when nothing was found.
func redactOnce(text string, opt RedactOptions, res *RedactResult) (out string, found bool) {
	var spans []span
	if opt.Email && strings.IndexByte(text, '@') >= 0 {
		spans = findEmails(text, spans)
	}
	if opt.IP {
		if strings.IndexByte(text, ':') >= 0 {
			spans = findIPv6(text, spans) // first: an IPv6 address may end in dotted IPv4
		}
		spans = findIPv4(text, spans)
	}
	if opt.Phone {
		spans = findPhones(text, spans)
	}
	if len(spans) == 0 {
		return text, false
	}
	spans = mergeSpans(spans)
	var b strings.Builder
	b.Grow(len(text))
	last := 0
	for _, s := range spans {
		b.WriteString(text[last:s.start])
		switch s.kind {
		case kindEmail:
			b.WriteString(opt.EmailPlaceholder)
			res.Email++
		case kindIP:
			b.WriteString(opt.IPPlaceholder)
			res.IP++
		default:
			b.WriteString(opt.PhonePlaceholder)
			res.Phone++
		}
		last = s.end
	}
	b.WriteString(text[last:])
	return b.String(), true
}

// mergeSpans sorts spans by start and joins overlapping ones, so the
// rebuild loop sees disjoint spans in order. Two e-mail candidates can
// share bytes ("a@relay.example.net@pop.example.net": the second local
// part is the first domain); a joined span is one replacement of the
// first-claimed kind among its parts.
func mergeSpans(spans []span) []span {
	sort.Slice(spans, func(i, j int) bool {
		if spans[i].start != spans[j].start {
			return spans[i].start < spans[j].start
		}
		return spans[i].kind < spans[j].kind
	})
	out := spans[:1]
	for _, s := range spans[1:] {
		last := &out[len(out)-1]
		if s.start < last.end {
			last.end = max(last.end, s.end)
			last.kind = min(last.kind, s.kind)
			continue
		}
		out = append(out, s)
	}
	return out
}

func overlaps(spans []span, start, end int) bool {
	for _, s := range spans {
		if start < s.end && s.start < end {
			return true
		}
	}
	return false
}

func isDigit(c byte) bool  { return '0' <= c && c <= '9' }
func isLetter(c byte) bool { return ('a' <= c && c <= 'z') || ('A' <= c && c <= 'Z') }
func isHex(c byte) bool    { return isDigit(c) || ('a' <= c && c <= 'f') || ('A' <= c && c <= 'F') }

// isWordByte reports whether c glues to a neighbouring token: ASCII
// letters and digits, '_', and any byte of a non-ASCII character.
func isWordByte(c byte) bool { return isDigit(c) || isLetter(c) || c == '_' || c >= 0x80 }

func isLocalByte(c byte) bool {
	return isDigit(c) || isLetter(c) || strings.IndexByte(".!#$%&'*+/=?^_`{|}~-", c) >= 0
}

func isDomainByte(c byte) bool { return isDigit(c) || isLetter(c) || c == '-' || c == '.' }

func findEmails(text string, spans []span) []span {
	for from := 0; ; {
		k := strings.IndexByte(text[from:], '@')
		if k < 0 {
			return spans
		}
		at := from + k
		from = at + 1
		l := at
		for l > 0 && isLocalByte(text[l-1]) {
			l--
		}
		for l < at && text[l] == '.' {
			l++
		}
		r := at + 1
		for r < len(text) && isDomainByte(text[r]) {
			r++
		}
		for r > at+1 && (text[r-1] == '.' || text[r-1] == '-') {
			r--
		}
		if l == at || text[at-1] == '.' || !validDomain(text[at+1:r]) {
			continue
		}
		if r < len(text) && text[r] >= 0x80 {
			continue // the domain runs on in a script we do not parse
		}
		spans = append(spans, span{l, r, kindEmail})
		from = r
	}
}

// validDomain reports whether d is dot-separated labels of letters, digits
// and inner dashes, with at least two labels and an alphabetic last label
// of two or more letters.
func validDomain(d string) bool {
	labels := 0
	last := ""
	for d != "" {
		label, rest, _ := strings.Cut(d, ".")
		if label == "" || label[0] == '-' || label[len(label)-1] == '-' || len(label) > 63 {
			return false
		}
		labels++
		last, d = label, rest
	}
	if labels < 2 || len(last) < 2 {
		return false
	}
	for i := 0; i < len(last); i++ {
		if !isLetter(last[i]) {
			return false
		}
	}
	return true
}

// parseOctet reads a decimal 0-255 without leading zeros at s[i:] and
// returns the index after it, or -1.
func parseOctet(s string, i int) int {
	j, v := i, 0
	for j < len(s) && j-i < 3 && isDigit(s[j]) {
		v = v*10 + int(s[j]-'0')
		j++
	}
	if j == i || v > 255 || (j-i > 1 && s[i] == '0') || (j < len(s) && isDigit(s[j])) {
		return -1
	}
	return j
}

func findIPv4(text string, spans []span) []span {
	for i := 0; i < len(text); i++ {
		if !isDigit(text[i]) || (i > 0 && (isWordByte(text[i-1]) || text[i-1] == '.')) {
			continue
		}
		j := i
		ok := true
		for part := 0; part < 4 && ok; part++ {
			if part > 0 {
				if j >= len(text) || text[j] != '.' {
					ok = false
					break
				}
				j++
			}
			if j = parseOctet(text, j); j < 0 {
				ok = false
			}
		}
		if !ok {
			// skip the rest of this digit run so it is not retried from its middle
			for i+1 < len(text) && isDigit(text[i+1]) {
				i++
			}
			continue
		}
		if j < len(text) && (isWordByte(text[j]) || (text[j] == '.' && j+1 < len(text) && isDigit(text[j+1]))) {
			i = j
			continue
		}
		if !overlaps(spans, i, j) {
			spans = append(spans, span{i, j, kindIP})
		}
		i = j - 1
	}
	return spans
}

func isV6Byte(c byte) bool { return isHex(c) || c == ':' || c == '.' }

func findIPv6(text string, spans []span) []span {
	for from := 0; ; {
		k := strings.IndexByte(text[from:], ':')
		if k < 0 {
			return spans
		}
		c := from + k
		l := c
		for l > 0 && isV6Byte(text[l-1]) {
			l--
		}
		r := c
		for r < len(text) && isV6Byte(text[r]) {
			r++
		}
		from = r
		if l > 0 && (isWordByte(text[l-1]) || text[l-1] == '/') {
			continue
		}
		if r < len(text) && isWordByte(text[r]) {
			continue
		}
		for r > l && text[r-1] == '.' {
			r--
		}
		if r-l >= 2 && text[r-1] == ':' && text[r-2] != ':' {
			r--
		}
		for l < r && text[l] == '.' {
			l++
		}
		cand := text[l:r]
		if strings.Count(cand, ":") < 2 || strings.IndexAny(cand, "0123456789") < 0 {
			continue
		}
		a, err := netip.ParseAddr(cand)
		if err != nil || !a.Is6() || overlaps(spans, l, r) {
			continue
		}
		spans = append(spans, span{l, r, kindIP})
	}
}

// maxPhoneGroups bounds the digit groups of one phone-number candidate
// (international numbers have at most about six).
const maxPhoneGroups = 8

func findPhones(text string, spans []span) []span {
	var groups [maxPhoneGroups]int    // digits per group
	var seps [maxPhoneGroups + 1]byte // separator before each group
	for i := 0; i < len(text); i++ {
		c := text[i]
		if !(isDigit(c) || c == '+' || c == '(') {
			continue
		}
		if i > 0 {
			p := text[i-1]
			if isWordByte(p) || strings.IndexByte(".-/:@+#$€£,", p) >= 0 {
				continue
			}
		}
		j := i
		plus := false
		if text[j] == '+' {
			plus = true
			j++
		}
		ng := 0
		parens := false
		end := -1
		for ng < maxPhoneGroups {
			g := j
			paren := false
			if g < len(text) && text[g] == '(' {
				paren = true
				g++
			}
			d := g
			for d < len(text) && isDigit(text[d]) {
				d++
			}
			if d == g || (paren && (d >= len(text) || text[d] != ')')) {
				break
			}
			groups[ng] = d - g
			if paren {
				parens = true
				d++
			}
			ng++
			end = d
			// separator: one of ' ', '-', '.', or ") " already consumed
			if d < len(text) && (text[d] == ' ' || text[d] == '-' || text[d] == '.') {
				seps[ng] = text[d]
				j = d + 1
				if j < len(text) && text[j] == ' ' && text[d] == '-' {
					j++ // "555 - 1234" style spacing is rare; allow "- "
				}
				continue
			}
			if paren && d < len(text) && (isDigit(text[d]) || text[d] == '(') {
				seps[ng] = ' '
				j = d
				continue
			}
			break
		}
		if ng == 0 {
			continue
		}
		if end < len(text) && (isWordByte(text[end]) || ((text[end] == '.' || text[end] == ':' || text[end] == ',') &&
			end+1 < len(text) && isDigit(text[end+1]))) {
			i = end
			continue
		}
		if isPhone(groups[:ng], seps[1:ng], plus, parens) && !overlaps(spans, i, end) {
			spans = append(spans, span{i, end, kindPhone})
		}
		i = end - 1
	}
	return spans
}

// isPhone decides whether digit groups look like a phone number rather
// than a plain number, date, range or thousands grouping.
func isPhone(groups []int, seps []byte, plus, parens bool) bool {
	digits := 0
	for i, g := range groups {
		digits += g
		if i > 0 && g < 2 {
			return false
		}
	}
	if digits < 7 || digits > 15 {
		return false
	}
	if len(groups) == 1 {
		return plus
	}
	if plus || parens {
		return true
	}
	same := true
	for _, s := range seps {
		same = same && s == seps[0]
	}
	// thousands grouping: 1-3 digits, then groups of exactly three, joined
	// by spaces or dots throughout
	if same && (seps[0] == ' ' || seps[0] == '.') && groups[0] <= 3 {
		thousands := true
		for _, g := range groups[1:] {
			thousands = thousands && g == 3
		}
		if thousands {
			return false
		}
	}
	// dates (2021-03-04, 04.03.2021, 4.3.2021 is too short anyway) and
	// year ranges (1990-2000)
	if same && len(groups) == 3 && (groups[0] == 4 && groups[1] <= 2 && groups[2] <= 2 ||
		groups[0] <= 2 && groups[1] <= 2 && groups[2] == 4) {
		return false
	}
	if len(groups) == 2 && groups[0] == 4 && groups[1] == 4 {
		return false
	}
	return true
}
