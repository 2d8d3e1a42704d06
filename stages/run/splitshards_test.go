package run

import (
	"bytes"
	"reflect"
	"strings"
	"testing"

	"winnow/shard"
)

// The left-out records a shards task hands to the write phase round-trip
// (no field lost), and any bytes either fail to parse or are exactly the
// encoding of what they parse to (no record read two ways).
func FuzzLeftOutRecord(f *testing.F) {
	f.Add("forum-17", "forum", "raw/forum/forum-00001.jsonl.zst", int64(42), 930, 4100, "its source had more tokens than its mix share needed", "forum-17#2 forum-17#3", []byte{})
	f.Add("", "", "", int64(-1), 0, 0, "", "", []byte{0, 0, 0, 1, 0, 0, 0, 0})
	f.Add("doc", "web", "a.warc.gz", int64(1<<40), 1, 2, "total capped at budget_tokens 5000", "", []byte{3, 'a', 'b', 'c', 0, 0, 2, 0, 0, 0, 1, 1, 'x'})
	f.Fuzz(func(t *testing.T, doc, source, file string, line int64, tokens, nbytes int, reason, pieces string, raw []byte) {
		if tokens < 0 || nbytes < 0 {
			return
		}
		l := shard.LeftOut{Doc: doc, Source: source, File: file, Line: line, Tokens: tokens, Bytes: nbytes, Reason: reason}
		if pieces != "" {
			l.Pieces = strings.Split(pieces, " ")
		}
		enc := appendLeftOut(nil, &l)
		back, err := parseLeftOut(enc)
		if err != nil {
			t.Fatalf("%+v: %v", l, err)
		}
		if !reflect.DeepEqual(back, l) {
			t.Fatalf("round trip: %+v, want %+v", back, l)
		}
		if got, err := parseLeftOut(raw); err == nil {
			if again := appendLeftOut(nil, &got); !bytes.Equal(again, raw) {
				t.Fatalf("%x parses to %+v, which encodes to %x", raw, got, again)
			}
		}
	})
}
