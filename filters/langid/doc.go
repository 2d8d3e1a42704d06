// Package langid identifies the language of a document among a set of
// candidate languages (by default every language the models cover, see
// AllLanguages), deciding with the models of lingua-go
// (github.com/pemistahl/lingua-go, v1.4.0) but about a hundred times faster
// than lingua-go run over the whole text, at the same accuracy. It is pure:
// it reads no files (lingua's models are embedded in lingua's package).
//
// # Method
//
// 1. One pass over the whole text classifies every rune with a 64 KiB
// table of the Basic Multilingual Plane: letters (and combining marks that
// follow a letter) by Unicode script, white space, everything else. HTML
// tags and character entities are skipped and count as non-letters. This
// gives the letter count and letter share the langid stage's no_language
// rule uses, and the script most of the text is in: a Han, kana or Hangul
// letter weighs three Latin ones (cjkLetterWeight), so a page mostly in
// Chinese or Japanese with some English lines is Chinese or Japanese.
//
// 2. A script that names one candidate decides without any n-gram model:
// Hangul is Korean, Greek Greek, Hebrew Hebrew, Thai Thai, and so on for
// Armenian, Georgian, Bengali, Gujarati, Gurmukhi, Tamil and Telugu; Latin,
// Cyrillic, Arabic or Devanagari too when only one candidate uses it (the
// default list has one Devanagari language, Hindi). Han text is Japanese
// when at least 10% of its CJK letters are kana, Chinese otherwise (the
// UDHR paragraphs run at 33% or more kana in Japanese, 0% in Chinese). A
// script no candidate uses gives Undetermined ("und").
//
// 3. Scripts shared by several candidates (Latin, Cyrillic, Arabic,
// Devanagari) are scored on bounded samples: a text of up to three samples'
// length (3 × 500 characters) is read whole, in at most three pieces; a
// longer one is sampled with windows of 500 characters at its start, end
// and middle, then at quarter and eighth points while the samples disagree
// (the leading language holds less than 70% of what was read), up to nine.
// The cost per document is thus bounded whatever its length.
//
// 4. Each sample is scored exactly as lingua scores text in low-accuracy
// mode, and in both modes from 120 letters on: the text is lower-cased and
// split into words (runs of \p{L}; CJK letters are one-letter words), and
// each language's score is the sum, over the sample's distinct trigrams, of
// the log of lingua's probability for that trigram, backing off to its
// first two letters and then its first letter when the language's model
// lacks it. Confidences are the softmax of the scores, as lingua computes
// them. The probabilities are lingua's own: its 1-, 2- and 3-gram model
// files are decoded from the data lingua embeds and packed, per script, in
// open-addressing tables keyed by the runes of the n-gram, whose row holds
// every candidate's log-probability with the back-off already applied. One
// lookup per trigram yields the scores of all languages, with no regular
// expression, no allocation and no arbitrary-precision arithmetic (where
// lingua spends its time). A row stores each log-probability negated in
// steps of 1/2048 nat in 16 bits (at most 0.00024 nat off lingua's value;
// every value of the 75 models fits, TestLangQuantisation), four languages
// to a 64-bit word summed two at a time in 32-bit lanes, so the 49
// Latin-script languages' row is two cache lines; a table slot is 4 bytes
// (row index and an 8-bit hash fingerprint), the key being the row's first
// word. A sample's distinct trigrams are collected first, then looked up,
// then summed, so the processor overlaps the cache misses of independent
// lookups. Integer sums are exact, so scores do not depend on the order.
//
// 5. Close calls go to lingua itself. When the two best languages of a
// sample are less than 8 nats apart (a likelihood ratio under ~3000), the
// sample is decided by a lingua detector over the languages within 8 nats
// of the best, so that lingua's rule filters (unique letters and the like)
// have their say. When the sample has 30 to 119 letters and the two best
// are a confusable pair (Danish, Bokmål, Nynorsk, Swedish; Czech, Slovak;
// Spanish, Portuguese, Catalan; and a few more), lingua decides in
// high-accuracy mode, with its 1- to 5-gram models, between the two. These
// detectors are built once per language set and shared; lingua's methods
// only read its loaded models, so they are safe for concurrent use (see
// TestLangConcurrentDetect, run with -race). About one sample in two hundred
// goes to lingua on the UDHR paragraphs of 100+ characters, one in forty
// on the generated web pages of the benchmark.
//
// Scripts without spaces between words inside lingua's models (Devanagari
// splits words at every vowel sign) can leave a short sample without any
// trigram; such a sample is scored on its bigrams and letters instead, and
// when lingua, asked about a close call, names nothing, the packed scores
// decide.
//
// Latin-script Serbian: lingua models Serbian in Cyrillic only. When the
// Latin model names Croatian or Bosnian and Serbian is a candidate, the
// text is transliterated letter for letter to Serbian Cyrillic and scored
// with lingua's Serbian model (see serbian.go); it is Serbian when that
// model explains it better per trigram.
//
// Close pairs: when the answer is Bosnian, Croatian or Serbian (Latin
// script), or Indonesian or Malay, a second stage counts marker words
// (ekavian or ijekavian forms, each standard's word choices, Indonesian
// and Malay spellings) and moves the answer within the group when they
// decide (see closepairs.go); other answers never reach it. Both groups are
// decided by word counts learnt from translation catalogues (naive Bayes,
// pairmodel.go and pairdata/) plus the marker words.
//
// 6. A document's language is the one with the largest mean confidence
// over its samples, each weighted by its number of scored trigrams; its
// confidence is that mean times the share of the document's letters in the
// deciding script, so a page half Russian, half English is about 0.5 sure
// of either.
//
// Decomposed accents (a letter then U+0301...) would split lingua's words
// at every mark, so samples holding such marks are put into NFC first
// (the UDHR Vietnamese text is partly decomposed: lingua alone reads 4 of
// its 49 long paragraphs as other languages).
//
// # Accuracy, speed, memory (this 2-core machine)
//
// UDHR paragraphs of 100+ characters (40 for zh, ja, ko), 26 languages,
// the 31 common web languages as candidates: 100% for every language
// (TestLangUDHRAccuracy). lingua
// over the same candidates: 100% in high-accuracy mode; in low-accuracy
// mode 97.4% for nb (a 113-character paragraph read as Danish) and 91.8%
// for vi (decomposed text), 100% elsewhere. On the UDHR paragraphs of 120+
// letters the detector names exactly what lingua names (TestLangAgreesWithLingua).
//
// BenchmarkDetect against BenchmarkLinguaWholeText on generated web-like
// pages of 2-5 KB (UDHR paragraphs with markup, an English block and
// foreign quotes), 31 candidates, one core: 66-69 MB per second of CPU
// time (wall clock about 30 MB/s when first measured) against lingua's
// 0.2 MB/s, naming the page's main language on 100% of the pages against
// lingua's 97-98%. With every language a candidate (75, the default):
// 33-39 MB per second of CPU time on one core (the benchmark's MB/cpu-s:
// user+system time of the process, so waiting for a core on the loaded
// 2-core machine does not count), against 25-30 MB/cpu-s with float32
// rows and 16-byte slots, measured alternately on the same machine (the
// earlier "about 14 MB/s" was read off a CPU profile at a load of 7-20);
// the main language of 101 of the 104 pages is found (Indonesian pages
// read as Malay). Each trigram row holds 49 Latin-script languages instead
// of 25, and close calls (id/ms, hr/bs...) are more frequent: lingua,
// asked about one sample in ten pages, takes a quarter of the time.
// Samples of 120+ letters go to lingua only when their two best languages
// are within 2 nats (longAmbiguityNats), which cut the time by 4.
//
// The packed tables of all 75 languages take 21 MB (build: about 7 s with
// lingua's trigram models preloaded, 360 MB peak RSS in the test); those
// of the 31 common web languages 7.4 MB; with lingua's
// preloaded trigram models the detector holds about 40 MB and builds in
// about 0.5 s on first use. Lingua's high-accuracy models of a confusable
// language (~20 MB each) load on first need: 153 MB for all seven such
// default candidates (cs, da, es, nb, pt, sk, sv), the most it can reach.
// Options.LowAccuracy (stage key low_accuracy) never loads them, at the
// cost of the nb paragraph above. Loading every candidate's high-accuracy
// models, as lingua's high-accuracy mode does, takes 500 MB and 3.4 s.
//
// Detector.Shares gives a document's per-paragraph language shares
// (lines of at least 20 letters, each detected alone), for a page that
// mixes languages.
//
// # All languages
//
// ACCURACY.md holds the per-language accuracy on held-out texts
// (testdata/langeval: UDHR translations and Debian translation
// catalogues) with every language a candidate, long (50+ words) and short
// (5-20 words). The languages that stay below 97% on long texts are
// listed, with their measured floors, in langeval_test.go: the pairs
// lingua's models confuse (Bosnian/Croatian/Serbian in Latin script,
// Indonesian/Malay, and a few more).
//
// # Not done
//
// Lingua's rule filters are not mirrored outside close calls (they only
// matter where the n-gram scores are close). Documents are not segmented
// into languages: a mixed page gets one language and a lower confidence.
// Languages lingua does not model are never named.
package langid
