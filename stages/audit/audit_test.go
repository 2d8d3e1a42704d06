package audit_test

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf8"

	"winnow/stages/audit"
	"winnow/stages/run"
	"winnow/stages/spec"
)

// TestAuditMatchesIndependentRecount checks every number of the audit
// summary against a recount from the run's ledger, metrics, shards,
// manifest and contamination.json decoded here with klauspost/compress and
// encoding/json.
func TestAuditMatchesIndependentRecount(t *testing.T) {
	run := cachedRun(t, "full", fullStages)
	r := openRun(t, run, audit.OpenOptions{})
	s, _, err := audit.Summarize(r, audit.SummaryOptions{Samples: 3, Histograms: true})
	if err != nil {
		t.Fatal(err)
	}
	m := readManifest(t, run)
	ledger := ledgerFiles(t, run)

	// Decisions per stage, rule and action, with the first sample ids.
	type key struct{ stage, rule, action string }
	count := map[key]int64{}
	samples := map[key][]string{}
	bySource := map[key]map[string]int64{}
	for stage, recs := range ledger {
		for _, rc := range recs {
			k := key{stage, rc["rule"].(string), rc["action"].(string)}
			count[k]++
			if len(samples[k]) < 3 {
				samples[k] = append(samples[k], rc["doc"].(string))
			}
			if bySource[k] == nil {
				bySource[k] = map[string]int64{}
			}
			bySource[k][rc["source"].(string)]++
		}
	}
	if len(s.Rules) != len(count) {
		t.Errorf("audit has %d rule rows, the ledger %d decision kinds", len(s.Rules), len(count))
	}
	// Metrics rows, per stage, decoded independently.
	metrics := map[string][]map[string]any{}
	mfiles, _ := filepath.Glob(filepath.Join(run, "metrics", "*.jsonl.zst"))
	for _, f := range mfiles {
		metrics[strings.TrimSuffix(filepath.Base(f), ".jsonl.zst")] = readJSONL(t, f)
	}
	tokens := map[string]int64{}
	for _, row := range metrics["tokenize"] {
		tokens[row["doc"].(string)] = num(row["tokens"])
	}
	if len(tokens) == 0 {
		t.Fatal("the run has no token counts: the spec should count tokens")
	}
	for _, rr := range s.Rules {
		k := key{rr.Stage, rr.Rule, rr.Action}
		if rr.Docs != count[k] {
			t.Errorf("%v: audit %d docs, ledger %d", k, rr.Docs, count[k])
		}
		if strings.Join(rr.Samples, ",") != strings.Join(samples[k], ",") {
			t.Errorf("%v: samples %v, ledger's first %v", k, rr.Samples, samples[k])
		}
		for src, n := range bySource[k] {
			if rr.BySource[src] != n {
				t.Errorf("%v: source %s: %d, ledger %d", k, src, rr.BySource[src], n)
			}
		}
		in := num(manifestStage(t, m, rr.Stage)["docs_in"])
		if want := float64(count[k]) / float64(in); rr.Share != want {
			t.Errorf("%v: share %v, want %v", k, rr.Share, want)
		}
		// Bytes of drops of a measuring stage: its metrics rows.
		if rows, ok := metrics[rr.Stage]; ok && rr.Action == "drop" {
			var want int64
			for _, row := range rows {
				if row["dropped_by"] == nil && row["action"] == "drop" && row["rule"] == rr.Rule {
					want += num(row["bytes"])
				}
			}
			if !rr.BytesExact || rr.Bytes != want {
				t.Errorf("%v: bytes %d (exact %v), metrics rows say %d", k, rr.Bytes, rr.BytesExact, want)
			}
		}
		// Tokens of drops: the token stage's rows of the removed docs.
		if rr.Action == "drop" {
			var want, docs int64
			for _, rc := range ledger[rr.Stage] {
				if rc["rule"] == rr.Rule && rc["action"] == "drop" {
					if n, ok := tokens[rc["doc"].(string)]; ok {
						want += n
						docs++
					}
				}
			}
			if rr.Tokens != want || rr.TokensDocs != docs {
				t.Errorf("%v: tokens %d over %d docs, recount %d over %d", k, rr.Tokens, rr.TokensDocs, want, docs)
			}
		}
	}
	// A stage whose byte figures are all exact accounts for all of
	// bytes_in - bytes_out.
	for _, f := range s.Flow[1 : len(s.Flow)-1] {
		ms := manifestStage(t, m, f.Stage)
		var sum int64
		all := true
		for _, rr := range s.Rules {
			if rr.Stage == f.Stage {
				sum += rr.Bytes
				all = all && rr.BytesExact
			}
		}
		if all && sum != num(ms["bytes_in"])-num(ms["bytes_out"]) {
			t.Errorf("%s: rule bytes sum to %d, manifest bytes in-out %d", f.Stage, sum, num(ms["bytes_in"])-num(ms["bytes_out"]))
		}
		for _, fld := range []struct {
			got  int64
			name string
		}{{f.DocsIn, "docs_in"}, {f.DocsOut, "docs_out"}, {f.Dropped, "dropped"}, {f.Edited, "edited"}, {f.BytesIn, "bytes_in"}, {f.BytesOut, "bytes_out"}} {
			if fld.got != num(ms[fld.name]) {
				t.Errorf("flow %s %s: %d, manifest %d", f.Stage, fld.name, fld.got, num(ms[fld.name]))
			}
		}
	}

	// Sources: read from the manifest inputs, removals from the ledger,
	// output from the shards.
	read := map[string]int64{}
	for _, in := range m["inputs"].([]any) {
		im := in.(map[string]any)
		read[im["source"].(string)] += num(im["docs"])
	}
	removed := map[string]map[string]int64{}
	for stage, recs := range ledger {
		for _, rc := range recs {
			if rc["action"] != "drop" || stage == "read" {
				continue
			}
			src := rc["source"].(string)
			if removed[src] == nil {
				removed[src] = map[string]int64{}
			}
			removed[src][stage]++
		}
	}
	shardDocs, shardTokens := map[string]int64{}, map[string]int64{}
	var outTokens int64
	for _, l := range shardLines(t, run) {
		shardDocs[l["source"].(string)]++
		shardTokens[l["source"].(string)] += num(l["tokens"])
		outTokens += num(l["tokens"])
	}
	if len(s.Sources) != len(read) {
		t.Errorf("%d sources, manifest %d", len(s.Sources), len(read))
	}
	for _, src := range s.Sources {
		if src.DocsRead != read[src.Source] {
			t.Errorf("source %s read %d, manifest %d", src.Source, src.DocsRead, read[src.Source])
		}
		var rem int64
		for _, rc := range src.Removed {
			if rc.Docs != removed[src.Source][rc.Stage] {
				t.Errorf("source %s removed by %s: %d, ledger %d", src.Source, rc.Stage, rc.Docs, removed[src.Source][rc.Stage])
			}
			rem += rc.Docs
		}
		var want int64
		for _, n := range removed[src.Source] {
			want += n
		}
		if rem != want {
			t.Errorf("source %s: %d removed, ledger %d", src.Source, rem, want)
		}
		if src.ToOutput != shardDocs[src.Source] || src.TokensToOutput != shardTokens[src.Source] {
			t.Errorf("source %s to output %d docs %d tokens, shards hold %d docs %d tokens", src.Source, src.ToOutput, src.TokensToOutput,
				shardDocs[src.Source], shardTokens[src.Source])
		}
	}
	write := s.Flow[len(s.Flow)-1]
	if write.TokensIn != outTokens || write.TokensOut != outTokens || s.Totals.TokensOut != outTokens {
		t.Errorf("write tokens in %d out %d totals %d, shards hold %d", write.TokensIn, write.TokensOut, s.Totals.TokensOut, outTokens)
	}

	// Histograms: every non-shadow row is in exactly one bin.
	if len(s.Histograms) == 0 {
		t.Fatal("no histograms")
	}
	for _, h := range s.Histograms {
		rows := metrics[h.Stage]
		var docs, kept, byRule int64
		for _, row := range rows {
			if row["dropped_by"] != nil {
				continue
			}
			docs++
			if row["action"] != "drop" {
				kept++
			}
		}
		var sum, sumKept int64
		for i := range h.Kept {
			sum += h.Kept[i] + h.Removed[i] + h.Other[i]
			sumKept += h.Kept[i]
		}
		if h.Docs != docs || sum+h.Missing != docs || sumKept+countMissingKept(rows, h.Metric) != kept {
			t.Errorf("histogram %s.%s: docs %d, bins %d + missing %d, kept %d; rows %d, kept %d", h.Stage, h.Metric, h.Docs, sum, h.Missing, sumKept, docs, kept)
		}
		for _, th := range h.Thresholds {
			byRule = 0
			for _, row := range rows {
				if row["dropped_by"] == nil && row["rule"] == th.Rule {
					byRule++
				}
			}
			if th.Removed != byRule {
				t.Errorf("histogram %s.%s threshold %s: %d removed, rows say %d", h.Stage, h.Metric, th.Rule, th.Removed, byRule)
			}
		}
	}

	// Contamination: the report as written.
	var contam map[string]any
	b, err := os.ReadFile(filepath.Join(run, "contamination.json"))
	if err != nil {
		t.Fatal(err)
	}
	json.Unmarshal(b, &contam)
	if s.Contamination == nil {
		t.Fatal("no contamination summary")
	}
	for i, e := range contam["evals"].([]any) {
		em := e.(map[string]any)
		got := s.Contamination.Evals[i]
		if got.Name != em["name"] || int64(got.Items) != num(em["items"]) || int64(got.ItemsContaminated) != num(em["items_contaminated"]) || got.DocsAffected != num(em["docs_affected"]) {
			t.Errorf("contamination %v, file %v", got, em)
		}
	}
	if count[key{"decontaminate", "contaminated", "drop"}] == 0 {
		t.Error("the generated corpus leaks eval items: expected contaminated drops")
	}
}

// countMissingKept counts kept rows whose metric is null (they are in no
// bin).
func countMissingKept(rows []map[string]any, metric string) int64 {
	var n int64
	for _, row := range rows {
		if row["dropped_by"] == nil && row["action"] != "drop" && row[metric] == nil {
			n++
		}
	}
	return n
}

// TestExplainFollowsOneDocument explains a removed and a kept document
// and checks them against the ledger and the shards.
func TestExplainFollowsOneDocument(t *testing.T) {
	run := cachedRun(t, "full", fullStages)
	r := openRun(t, run, audit.OpenOptions{})
	ledger := ledgerFiles(t, run)

	// A document the quality stage removed: later per-document stages
	// measured it (shadow rows), global stages never saw it.
	q := ledger["quality"]
	if len(q) == 0 {
		t.Fatal("quality removed nothing")
	}
	id := q[0]["doc"].(string)
	ex := explain(t, r, id)
	if len(ex.Docs) != 1 {
		t.Fatalf("%d documents with id %s", len(ex.Docs), id)
	}
	p := ex.Docs[0]
	if p.Result.Status != "removed" || p.Result.Stage != "quality" || p.Result.Rule != q[0]["rule"] {
		t.Errorf("result %+v, ledger %v", p.Result, q[0])
	}
	var sawShadow, sawUnreached, sawFail bool
	for _, d := range p.Decisions {
		if d.Stage == "quality" {
			for _, mv := range d.Metrics {
				for _, c := range mv.Checks {
					if c.Rule == q[0]["rule"] && !c.Pass {
						sawFail = true
					}
				}
			}
		}
		if d.Stage == "repetition" && d.Shadow {
			sawShadow = true
		}
		if d.Stage == "exact_dedup" && d.Action == "not reached" {
			sawUnreached = true
		}
	}
	if !sawFail || !sawShadow || !sawUnreached {
		t.Errorf("decisions %+v: want a failing quality check, a shadow repetition row and exact_dedup not reached", p.Decisions)
	}

	// A near duplicate: its kept twin is named.
	nd := ledger["near_dedup"]
	if len(nd) == 0 {
		t.Fatal("near_dedup removed nothing")
	}
	ex = explain(t, r, nd[0]["doc"].(string))
	if got := ex.Docs[0].Result; got.Status != "removed" || got.Stage != "near_dedup" || !strings.Contains(got.Reason, nd[0]["of"].(string)) {
		t.Errorf("near duplicate result %+v, ledger %v", got, nd[0])
	}

	if !strings.Contains(ex.Docs[0].Result.Reason, fmt.Sprintf("(similarity %v)", nd[0]["similarity"])) {
		t.Errorf("near duplicate reason %q lacks the similarity %v", ex.Docs[0].Result.Reason, nd[0]["similarity"])
	}

	// The kept twin lists the documents removed in its favour, as the
	// ledgers of both dedup stages name them.
	twin := nd[0]["of"].(string)
	want := map[string]float64{}
	for _, stage := range []string{"exact_dedup", "near_dedup"} {
		for _, rec := range ledger[stage] {
			if rec["of"] == twin {
				sim, ok := rec["similarity"].(float64)
				if !ok {
					sim = 1
				}
				want[rec["doc"].(string)] = sim
			}
		}
	}
	ex = explain(t, r, twin)
	tp := ex.Docs[0]
	if tp.Result.Status != "kept" || tp.CopiesTotal != len(want) || len(tp.Copies) != len(want) {
		t.Errorf("kept twin %s: %s, %d copies listed (%d total), ledgers name %d", twin, tp.Result.Status, len(tp.Copies), tp.CopiesTotal, len(want))
	}
	for _, c := range tp.Copies {
		if sim, ok := want[c.ID]; !ok || sim != c.Similarity {
			t.Errorf("kept twin %s: copy %+v, ledger similarity %v (listed %v)", twin, c, sim, ok)
		}
	}
	var text strings.Builder
	ex.WriteText(&text)
	if !strings.Contains(text.String(), fmt.Sprintf("copies removed in its favour: %d", len(want))) || !strings.Contains(text.String(), nd[0]["doc"].(string)) {
		t.Errorf("explain text of the kept twin:\n%s", text.String())
	}

	// A kept document: the shard line holding it.
	lines := shardLines(t, run)
	keptID := lines[len(lines)/2]["id"].(string)
	ex = explain(t, r, keptID)
	got := ex.Docs[0].Result
	if got.Status != "kept" || len(got.Shards) != 1 || got.Shards[0].Line != int64(len(lines)/2+1) {
		t.Errorf("kept document %s: %+v, want shard line %d", keptID, got, len(lines)/2+1)
	}
	if _, err := audit.Explain(r, "no-such-document"); err == nil {
		t.Error("explaining an unknown id succeeded")
	}
}

// TestRuleSamplesRecoverTextAndMarks re-reads removed documents from the
// inputs and checks what is marked.
func TestRuleSamplesRecoverTextAndMarks(t *testing.T) {
	run := cachedRun(t, "full", fullStages)
	r := openRun(t, run, audit.OpenOptions{})

	// The text shown is what the stage saw: its length equals the length
	// stage's measured chars.
	set := ruleSamples(t, r, "length/min_chars", 3)
	if len(set.Samples) == 0 {
		t.Fatal("no min_chars samples")
	}
	for _, sm := range set.Samples {
		if sm.Text == "" || float64(utf8.RuneCountInString(sm.Text)) != sm.Metrics["chars"] {
			t.Errorf("%s: text %q (%d chars), measured %v (%s)", sm.ID, sm.Text, utf8.RuneCountInString(sm.Text), sm.Metrics["chars"], sm.TextNote)
		}
	}

	// Repeated lines: each marked line repeats an earlier line.
	set = ruleSamples(t, r, "repeated_lines_share", 2)
	for _, sm := range set.Samples {
		if len(sm.Marks) == 0 {
			t.Errorf("%s: nothing marked", sm.ID)
		}
		for _, mk := range sm.Marks {
			line := strings.TrimSpace(sm.Text[mk.Start:mk.End])
			before := sm.Text[:mk.Start]
			found := false
			for _, l := range strings.Split(before, "\n") {
				if strings.TrimSpace(l) == line {
					found = true
				}
			}
			if !found {
				t.Errorf("%s: marked %q does not repeat an earlier line", sm.ID, line)
			}
		}
	}

	// Near duplicates: the kept twin named by the ledger, with its text.
	set = ruleSamples(t, r, "near_dedup/near_duplicate", 2)
	for _, sm := range set.Samples {
		if sm.Twin == nil || sm.Twin.ID != sm.Extra["of"] || sm.Twin.Text == "" || sm.Twin.Jaccard <= 0 || sm.Twin.Jaccard > 1 {
			t.Errorf("%s: twin %+v, ledger of=%v", sm.ID, sm.Twin, sm.Extra["of"])
		}
	}

	// Contamination: the marked words belong to the matched eval item.
	set = ruleSamples(t, r, "contaminated", 3)
	items := evalItems(t, filepath.Join(corpus(t), "corpus", "evals", "hull-qa.jsonl"))
	for _, sm := range set.Samples {
		if len(sm.Marks) == 0 {
			t.Errorf("%s: no eval n-gram marked (%s)", sm.ID, sm.MarkNote)
			continue
		}
		item := items[sm.Extra["item"].(string)]
		found := false
		for _, mk := range sm.Marks {
			if strings.Contains(" "+simpleWords(item)+" ", " "+simpleWords(sm.Text[mk.Start:mk.End])+" ") {
				found = true
			}
		}
		if !found {
			t.Errorf("%s: no mark is part of item %v %q", sm.ID, sm.Extra["item"], item)
		}
	}

	// An unknown rule lists the rules with decisions.
	if _, err := audit.RuleSamples(r, "no_such_rule", 1); err == nil || !strings.Contains(err.Error(), "quality/") {
		t.Errorf("unknown rule: %v", err)
	}

	// Inputs gone: the text is not shown and the reason says so.
	r2 := openRun(t, run, audit.OpenOptions{SpecDir: t.TempDir()})
	set = ruleSamples(t, r2, "min_chars", 1)
	if sm := set.Samples[0]; sm.Text != "" || !strings.Contains(sm.TextNote, "gone") {
		t.Errorf("with the inputs gone: text %q, note %q", sm.Text, sm.TextNote)
	}
}

// evalItems reads the eval set: id -> question and answer.
func evalItems(t *testing.T, path string) map[string]string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]string{}
	for _, l := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		var m map[string]string
		if err := json.Unmarshal([]byte(l), &m); err != nil {
			t.Fatal(err)
		}
		out[m["id"]] = m["question"] + " " + m["answer"]
	}
	return out
}

// simpleWords lowercases s and keeps runs of letters and digits.
func simpleWords(s string) string {
	var b strings.Builder
	for _, r := range strings.ToLower(s) {
		if r >= 'a' && r <= 'z' || r >= '0' && r <= '9' {
			b.WriteRune(r)
		} else {
			b.WriteByte(' ')
		}
	}
	return strings.Join(strings.Fields(b.String()), " ")
}

// TestAuditReadErrors: unreadable records are counted under stage read,
// listed as input errors, and explained.
func TestAuditReadErrors(t *testing.T) {
	dir := t.TempDir()
	lines := []string{
		`{"id":"good-1","text":"The keel bolts were checked and torqued before launch."}`,
		`{"id":"broken","text":"unterminated`,
		`{"id":"short","text":"tiny"}`,
		"{\"id\":\"bad-utf8\",\"text\":\"Bilge pump \xff\xfe rebuilt with a new diaphragm kit.\"}",
	}
	if err := os.MkdirAll(filepath.Join(dir, "raw"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "raw", "a.jsonl"), []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	body := "name: errs\ninputs:\n  - source: yard\n    paths: [raw/]\nstages:\n  - kind: normalize\n  - kind: length\n    min_chars: 10\noutput:\n  dir: out/\n"
	if err := os.WriteFile(filepath.Join(dir, "spec.yaml"), []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := spec.LoadSpec(filepath.Join(dir, "spec.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := run.RunSpec(context.Background(), s, run.RunOptions{Workers: 1}); err != nil {
		t.Fatal(err)
	}
	run := filepath.Join(dir, "out")
	r := openRun(t, run, audit.OpenOptions{})
	sum, _, err := audit.Summarize(r, audit.SummaryOptions{Samples: 3})
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]int64{}
	for _, rr := range sum.Rules {
		got[rr.Stage+"/"+rr.Rule+"/"+rr.Action] = rr.Docs
	}
	want := map[string]int64{"read/malformed_record/drop": 1, "read/invalid_utf8/edit": 1, "length/min_chars/drop": 1, "normalize/normalized/edit": got["normalize/normalized/edit"]}
	for k, n := range want {
		if got[k] != n {
			t.Errorf("%s: %d, want %d (all: %v)", k, got[k], n, got)
		}
	}
	if sum.ErrorCount != 1 || len(sum.Errors) != 1 || sum.Errors[0].Line != 2 || sum.Sources[0].ReadErrors != 1 {
		t.Errorf("errors %d %+v, source %+v", sum.ErrorCount, sum.Errors, sum.Sources[0])
	}
	var b strings.Builder
	if err := sum.WriteText(&b); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(b.String(), "input errors: 1") || !strings.Contains(b.String(), "a.jsonl:2: malformed_record") {
		t.Errorf("text:\n%s", b.String())
	}
	set := ruleSamples(t, r, "malformed_record", 1)
	if sm := set.Samples[0]; sm.Text != "" || !strings.Contains(sm.TextNote, "read error") {
		t.Errorf("malformed sample %+v", sm)
	}
	ex := explain(t, r, set.Samples[0].ID)
	if ex.Docs[0].Result.Status != "read_error" {
		t.Errorf("explain of the malformed record: %+v", ex.Docs[0].Result)
	}
	ex = explain(t, r, "bad-utf8")
	if ex.Docs[0].Result.Status != "kept" || ex.Docs[0].Decisions[0].Rule != "invalid_utf8" {
		t.Errorf("explain of the repaired record: %+v", ex.Docs[0])
	}
}

// On the generated corpus, every near copy points at a document near_dedup
// kept, at a similarity at or above the threshold (no chains of
// similar-to-similar), and exact copies point at a document exact_dedup
// kept.
func TestDedupLedgersPointAtKeptDocuments(t *testing.T) {
	run := cachedRun(t, "full", fullStages)
	ledger := ledgerFiles(t, run)
	for _, stage := range []string{"exact_dedup", "near_dedup"} {
		removed := map[string]bool{}
		for _, rec := range ledger[stage] {
			removed[rec["doc"].(string)] = true
		}
		if len(removed) == 0 {
			t.Fatalf("%s removed nothing", stage)
		}
		for _, rec := range ledger[stage] {
			of, _ := rec["of"].(string)
			if of == "" || removed[of] {
				t.Errorf("%s: %s removed of %q, which the stage also removed", stage, rec["doc"], of)
			}
			if sim, ok := rec["similarity"].(float64); stage == "near_dedup" && (!ok || sim < 0.8) {
				t.Errorf("%s: %s removed of %s at similarity %v, threshold 0.8", stage, rec["doc"], of, rec["similarity"])
			}
		}
	}
}
