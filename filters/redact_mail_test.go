package filters

import (
	"net/mail"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// mailDir holds raw e-mail messages from Python's e-mail test suite, as
// Debian ships them (testdata/mail-python/README.md, PSF licence).
const mailDir = "../testdata/mail-python"

// addressHeaders are the RFC 5322 (section 3.6.2, 3.6.3) fields that
// hold address lists, plus the trace and list fields real mail carries.
var addressHeaders = []string{"From", "Sender", "Reply-To", "To", "Cc", "Bcc", "Return-Path",
	"Delivered-To", "Errors-To", "Resent-From", "Resent-To", "Resent-Cc", "X-Sender", "X-Original-To"}

// TestRedactRealMail runs Redact over real raw messages: it must not
// panic, must satisfy the fuzz invariants (idempotent, one placeholder
// per replacement), and must leave none of the addresses that Go's
// net/mail (an independent RFC 5322 parser) reads from the address
// headers.
func TestRedactRealMail(t *testing.T) {
	files, err := filepath.Glob(filepath.Join(mailDir, "msg_*.txt"))
	if err != nil || len(files) < 40 {
		t.Fatalf("%d messages in %s (%v): run its build.sh", len(files), mailDir, err)
	}
	opt := DefaultRedactOptions()
	checked := 0
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		text := string(b)
		r := Redact(text, opt)
		t.Run(filepath.Base(f), func(t *testing.T) { checkRedacted(t, text, r) })
		msg, err := mail.ReadMessage(strings.NewReader(text))
		if err != nil {
			continue // not every test message has parseable headers
		}
		for _, h := range addressHeaders {
			for _, v := range msg.Header[h] {
				list, err := mail.ParseAddressList(v)
				if err != nil {
					continue
				}
				for _, a := range list {
					if !isPlainAddress(a.Address) {
						continue // outside what Redact promises (package notes)
					}
					checked++
					if strings.Contains(r.Text, a.Address) {
						t.Errorf("%s: %s address %q left in the redacted text", filepath.Base(f), h, a.Address)
					}
				}
			}
		}
	}
	// the 46 messages carry about a hundred such header addresses; far
	// fewer means the fixture or the header list broke
	if checked < 90 {
		t.Fatalf("only %d header addresses checked", checked)
	}
	t.Logf("%d header addresses checked in %d messages", checked, len(files))
}

// isPlainAddress reports whether a parsed address is of the kind Redact
// promises to find (package notes): ASCII, no quoted local part, a
// domain of two or more labels whose last label is letters only.
func isPlainAddress(a string) bool {
	at := strings.LastIndexByte(a, '@')
	if at <= 0 || strings.ContainsAny(a, "\" ()[]") {
		return false
	}
	for i := 0; i < len(a); i++ {
		if a[i] >= 0x80 {
			return false
		}
	}
	dot := strings.LastIndexByte(a[at:], '.')
	if dot < 0 {
		return false
	}
	tld := a[at+dot+1:]
	return len(tld) >= 2 && strings.Trim(tld, "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ") == ""
}
