package filters

import (
	"net/netip"
	"testing"
)

// TestRedactFinds checks positives of each kind (addresses invented or
// from the documentation ranges: 192.0.2.0/24, 2001:db8::/32, 555 numbers).
func TestRedactFinds(t *testing.T) {
	opt := DefaultRedactOptions()
	for _, c := range []struct {
		in, want         string
		email, ip, phone int
	}{
		{"mail yard.office@larkspur-marine.example now", "mail <EMAIL> now", 1, 0, 0},
		{"(a.b+tag@mail.co.uk).", "(<EMAIL>).", 1, 0, 0},
		{"host 192.0.2.17 is down", "host <IP> is down", 0, 1, 0},
		{"at 10.0.0.1.", "at <IP>.", 0, 1, 0},
		{"v6 2001:db8::8a2e:370:7334 ok", "v6 <IP> ok", 0, 1, 0},
		{"link fe80::1ff:fe23:4567:890a,", "link <IP>,", 0, 1, 0},
		{"full 2001:0db8:0000:0000:0000:ff00:0042:8329", "full <IP>", 0, 1, 0},
		{"call +44 20 7946 0958 today", "call <PHONE> today", 0, 0, 1},
		{"call (555) 123-4567.", "call <PHONE>.", 0, 0, 1},
		{"or 555-123-4567", "or <PHONE>", 0, 0, 1},
		{"or 555.123.4567", "or <PHONE>", 0, 0, 1},
		{"fax +4930123456", "fax <PHONE>", 0, 0, 1},
		{"tél 01 23 45 67 89", "tél <PHONE>", 0, 0, 1},
		{"a@b.io and 192.0.2.1 and +1 555 010 9999", "<EMAIL> and <IP> and <PHONE>", 1, 1, 1},
	} {
		r := Redact(c.in, opt)
		if r.Text != c.want || r.Email != c.email || r.IP != c.ip || r.Phone != c.phone {
			t.Errorf("Redact(%q) = %q (%d %d %d), want %q (%d %d %d)", c.in, r.Text, r.Email, r.IP, r.Phone,
				c.want, c.email, c.ip, c.phone)
		}
	}
}

// TestRedactLeaves checks things that look like contact details but are
// not, which the heuristics are meant to leave alone (best effort).
func TestRedactLeaves(t *testing.T) {
	opt := DefaultRedactOptions()
	for _, in := range []string{
		"version 2.0.1 and 10.15.7",
		"dated 2021-03-04 and 04.03.2021",
		"from 1990-2000 onwards",
		"a crew of 12 500 000 people, or 1.234.567 boats",
		"price 1234567",
		"time 12:30:45",
		"std::vector and foo::bar",
		"ratio 3.14159",
		"user@localhost",
		"@handle and a @ b",
		"octets 256.1.1.1 and 1.2.3",
		"ISBN 978-3-16-148410-0",
		"serial 123456789012345678",
	} {
		if r := Redact(in, opt); r.Text != in {
			t.Errorf("Redact(%q) = %q, want it unchanged", in, r.Text)
		}
	}
}

// TestRedactIPv6AgreesWithNetip checks that every redacted IPv6 candidate
// is an address the standard library parses (general-purpose reference:
// net/netip).
func TestRedactIPv6AgreesWithNetip(t *testing.T) {
	for _, a := range []string{"::1", "2001:db8::1", "fe80::1", "2001:db8:85a3::8a2e:370:7334", "::ffff:192.0.2.128"} {
		if _, err := netip.ParseAddr(a); err != nil {
			t.Fatal(err)
		}
		if r := Redact("addr "+a+" end", DefaultRedactOptions()); r.IP != 1 || r.Text != "addr <IP> end" {
			t.Errorf("%s: %q", a, r.Text)
		}
	}
}

func TestRedactOptions(t *testing.T) {
	opt := RedactOptions{Phone: true, PhonePlaceholder: "[tel]"}
	r := Redact("a@b.io +1 555 010 9999", opt)
	if r.Text != "a@b.io [tel]" || r.Email != 0 || r.Phone != 1 {
		t.Fatalf("%+v", r)
	}
}

// TestRedactOverlappingSpans checks raw header lines whose addresses share
// bytes: with two '@' the second local part is the first domain, and the
// two e-mail spans overlap (this panicked in the rebuild loop). Overlapping
// spans are joined into one replacement, and a second pass finds nothing.
func TestRedactOverlappingSpans(t *testing.T) {
	opt := DefaultRedactOptions()
	for _, c := range []struct {
		in, want         string
		email, ip, phone int
	}{
		{"X-Sender: someone@relay.example.net@pop.example.net\n", "X-Sender: <EMAIL>\n", 1, 0, 0},
		{"Return-Path: <yard@larkspur-marine.example@relay.example.net>", "Return-Path: <<EMAIL>>", 1, 0, 0},
		{"From: a@b.example@c.example@d.example (three)", "From: <EMAIL> (three)", 1, 0, 0},
		{"X-Sender: a@b.example@c.example, 192.0.2.1@d.example", "X-Sender: <EMAIL>, <EMAIL>", 2, 0, 0},
		{"to x@ab.cd@ef and a@b.c@d.ef", "to <EMAIL>@ef and a@<EMAIL>", 2, 0, 0},
		// a placeholder is a new neighbour: "x@ab.cd-" ends in a dash
		// until the IP is replaced, then "x@ab.cd" is an address
		{"x@ab.cd-1.2.3.4", "<EMAIL>-<IP>", 1, 1, 0},
		{"mail a@b.co+15551234567", "mail <EMAIL><PHONE>", 1, 0, 1},
	} {
		r := Redact(c.in, opt)
		if r.Text != c.want || r.Email != c.email || r.IP != c.ip || r.Phone != c.phone {
			t.Errorf("Redact(%q) = %q (%d %d %d), want %q (%d %d %d)", c.in, r.Text, r.Email, r.IP, r.Phone,
				c.want, c.email, c.ip, c.phone)
		}
		checkRedacted(t, c.in, r)
	}
}
