package audit_test

import (
	"strconv"
	"strings"
	"testing"

	"winnow/stages/audit"
)

func whatIf(t *testing.T, run string, opt audit.WhatIfOptions) *audit.WhatIf {
	t.Helper()
	w, err := audit.RunWhatIf(openRun(t, run, audit.OpenOptions{}), opt)
	if err != nil {
		t.Fatal(err)
	}
	return w
}

// TestWhatIfAtRunLimitsReproducesRun recomputes every threshold stage at
// the run's own limits (explicitly set to their values) and expects the
// run's removals exactly.
func TestWhatIfAtRunLimitsReproducesRun(t *testing.T) {
	run := cachedRun(t, "perdoc", perDocStages)
	w := whatIf(t, run, audit.WhatIfOptions{Sets: []string{"length.min_chars=50", "quality.fewest_words=50", "repetition.most_repeated_lines=0.3",
		"lines.fewest_sentences=5"}})
	want := removedByRule(t, run)
	m := readManifest(t, run)
	rows := map[string]int{}
	for _, st := range []string{"length", "quality", "repetition", "lines"} {
		rows[st] = len(readJSONL(t, run+"/metrics/"+st+".jsonl.zst"))
	}
	checked := map[string]bool{}
	for _, c := range w.Checks {
		checked[c.Stage] = true
		if c.Mismatches != 0 || c.Rows != int64(rows[c.Stage]) {
			t.Errorf("check %s: %d rows (file has %d), %d mismatches %v", c.Stage, c.Rows, rows[c.Stage], c.Mismatches, c.Examples)
		}
	}
	for st := range rows {
		if !checked[st] {
			t.Errorf("stage %s was not checked", st)
		}
	}
	for _, sc := range append([]*audit.ScenarioResult{w.Combined}, w.PerSet...) {
		if sc.NewlyRemoved != 0 || sc.NewlyKept != 0 || sc.Moved != 0 || !sc.Exact {
			t.Errorf("%s: newly removed %d, kept %d, moved %d, exact %v", sc.Label, sc.NewlyRemoved, sc.NewlyKept, sc.Moved, sc.Exact)
		}
		if sc.DocsKept != num(manifestStage(t, m, "write")["docs_in"]) {
			t.Errorf("%s: %d kept, the run wrote %d", sc.Label, sc.DocsKept, num(manifestStage(t, m, "write")["docs_in"]))
		}
		got := map[string]int64{}
		for _, rd := range sc.Rules {
			got[rd.Stage+"/"+rd.Rule] = rd.Removed
			if rd.Removed != rd.RemovedRun {
				t.Errorf("%s: %s/%s removes %d, run %d", sc.Label, rd.Stage, rd.Rule, rd.Removed, rd.RemovedRun)
			}
		}
		for k, n := range want {
			if got[k] != n {
				t.Errorf("%s: %s removes %d, ledger %d", sc.Label, k, got[k], n)
			}
		}
	}
	if len(want) < 4 {
		t.Errorf("only %d rules removed anything (%v): the corpus should exercise more", len(want), want)
	}
}

// TestWhatIfMatchesRerun compares what-if at other limits with a real
// re-run of the same spec with those limits.
func TestWhatIfMatchesRerun(t *testing.T) {
	base := cachedRun(t, "perdoc", perDocStages)
	baseRemoved := removedIDs(t, base)
	cases := []struct {
		name string
		sets []string
	}{
		{"tighter", []string{"quality.fewest_words=200", "repetition.most_repeated_lines=0.05", "length.min_chars=1200"}},
		// Looser early rules let documents through to later stages,
		// which measured them as shadows.
		{"looser", []string{"length.min_chars=10", "quality.fewest_words=20", "quality.fewest_stop_words=1", "repetition.most_repeated_lines=0.6"}},
		{"mixed", []string{"quality.most_words=700", "quality.most_bulleted_lines=1", "repetition.most_top_2word_phrase_chars=0.12", "length.max_lines=60"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			w := whatIf(t, base, audit.WhatIfOptions{Sets: tc.sets, Samples: 1 << 20})
			re := runPipeline(t, "rerun-"+tc.name, perDocStages, tc.sets...)
			sc := w.Combined
			if !sc.Exact {
				t.Errorf("not exact: %v", sc.Notes)
			}
			m := readManifest(t, re)
			if got, want := sc.DocsKept, num(manifestStage(t, m, "write")["docs_in"]); got != want {
				t.Errorf("what-if keeps %d, the re-run %d", got, want)
			}
			lines := shardLines(t, re)
			var toks int64
			perSource := map[string]int64{}
			for _, l := range lines {
				toks += num(l["tokens"])
				perSource[l["source"].(string)]++
			}
			if sc.TokensKept != toks {
				t.Errorf("what-if keeps %d tokens, the re-run's shards hold %d", sc.TokensKept, toks)
			}
			for _, src := range sc.Sources {
				if src.Kept != perSource[src.Source] {
					t.Errorf("source %s: what-if keeps %d, re-run %d", src.Source, src.Kept, perSource[src.Source])
				}
			}
			want := removedByRule(t, re)
			got := map[string]int64{}
			for _, rd := range sc.Rules {
				got[rd.Stage+"/"+rd.Rule] = rd.Removed
			}
			for _, k := range keys(want) {
				if got[k] != want[k] {
					t.Errorf("%s: what-if removes %d, re-run %d", k, got[k], want[k])
				}
			}
			for _, k := range keys(got) {
				if got[k] != want[k] {
					t.Errorf("%s: what-if removes %d, re-run %d", k, got[k], want[k])
				}
			}
			// The flipping documents are exactly the re-run's.
			reRemoved := removedIDs(t, re)
			var newlyRemoved, newlyKept int64
			for id := range reRemoved {
				if !baseRemoved[id] {
					newlyRemoved++
				}
			}
			for id := range baseRemoved {
				if !reRemoved[id] {
					newlyKept++
				}
			}
			if sc.NewlyRemoved != newlyRemoved || sc.NewlyKept != newlyKept {
				t.Errorf("flips: what-if -%d +%d, re-run -%d +%d", sc.NewlyRemoved, sc.NewlyKept, newlyRemoved, newlyKept)
			}
			for _, f := range sc.FlipsRemoved {
				if !reRemoved[f.ID] || baseRemoved[f.ID] {
					t.Errorf("%s listed as newly removed", f.ID)
				}
			}
			for _, f := range sc.FlipsKept {
				if reRemoved[f.ID] || !baseRemoved[f.ID] {
					t.Errorf("%s listed as newly kept", f.ID)
				}
			}
			if newlyRemoved+newlyKept == 0 {
				t.Errorf("the change flips nothing: not a useful case")
			}
		})
	}
}

// TestWhatIfSweepMatchesScenarios checks that each point of a sweep equals
// the same limit set alone.
func TestWhatIfSweepMatchesScenarios(t *testing.T) {
	base := cachedRun(t, "perdoc", perDocStages)
	w := whatIf(t, base, audit.WhatIfOptions{Sweeps: []string{"quality.fewest_words=20:140:60"}})
	if len(w.Sweeps) != 1 || len(w.Sweeps[0].Points) != 3 {
		t.Fatalf("sweeps %+v", w.Sweeps)
	}
	prev := int64(-1)
	for _, p := range w.Sweeps[0].Points {
		one := whatIf(t, base, audit.WhatIfOptions{Sets: []string{"quality.fewest_words=" + strconv.FormatFloat(p.Value, 'g', -1, 64)}})
		if p.DocsKept != one.Combined.DocsKept || p.TokensKept != one.Combined.TokensKept || p.NewlyRemoved != one.Combined.NewlyRemoved {
			t.Errorf("sweep point %v: %+v, scenario %+v", p.Value, p, one.Combined)
		}
		if prev >= 0 && p.RemovedByStage < prev {
			t.Errorf("a higher fewest_words removes fewer documents: %v", w.Sweeps[0].Points)
		}
		prev = p.RemovedByStage
	}
	if _, err := audit.RunWhatIf(openRun(t, base, audit.OpenOptions{}), audit.WhatIfOptions{Sweeps: []string{"quality.fewest_words=200:20:20"}}); err == nil {
		t.Error("a sweep stepping away from its end was accepted")
	}
}

// TestWhatIfGlobalStagesEstimate: when a change alters what reaches a
// global stage, the result is marked as an estimate with the reason.
func TestWhatIfGlobalStagesEstimate(t *testing.T) {
	run := cachedRun(t, "full", fullStages)
	// Looser: documents the run removed now reach exact_dedup, which
	// never saw them.
	w := whatIf(t, run, audit.WhatIfOptions{Sets: []string{"quality.fewest_words=10"}})
	sc := w.Combined
	if sc.Exact || sc.Estimated == 0 || sc.NewlyKept == 0 {
		t.Fatalf("looser quality before dedup: exact %v, estimated %d, newly kept %d", sc.Exact, sc.Estimated, sc.NewlyKept)
	}
	var dedup *audit.StageDelta
	for i := range sc.Stages {
		if sc.Stages[i].Stage == "exact_dedup" {
			dedup = &sc.Stages[i]
		}
	}
	if dedup == nil || !dedup.Estimate || dedup.NewInput == 0 || !strings.Contains(strings.Join(sc.Notes, " "), "exact_dedup (global)") {
		t.Errorf("exact_dedup delta %+v, notes %v", dedup, sc.Notes)
	}
	// Tighter: documents exact_dedup saw are removed before it.
	w = whatIf(t, run, audit.WhatIfOptions{Sets: []string{"quality.fewest_words=300"}})
	for _, d := range w.Combined.Stages {
		if d.Stage == "exact_dedup" && (!d.Estimate || d.LostInput == 0) {
			t.Errorf("tighter quality: exact_dedup %+v", d)
		}
	}
	// A limit after every change point and before no global stage would
	// be exact; here every threshold stage precedes the dedup stages, so
	// a change that flips nothing stays exact.
	w = whatIf(t, run, audit.WhatIfOptions{Sets: []string{"quality.most_words=100000"}})
	if !w.Combined.Exact {
		t.Errorf("an unchanged limit gave an estimate: %v", w.Combined.Notes)
	}
}

// TestWhatIfLanguages: what-if on langid's `languages` recomputes the
// language rule from each document's stored "lang" and must agree, document
// for document, with a real re-run that detects again with those languages
// (the re-run is the reference); a stricter confidence set with it too.
func TestWhatIfLanguages(t *testing.T) {
	const st = `stages:
  - kind: normalize
  - kind: langid
    languages: [en]
  - kind: quality
output:
  tokenizer: cl100k_base
`
	run := cachedRun(t, "langs-en", st)
	for _, sets := range [][]string{
		{"langid.languages=en,de,fr"},
		{"langid.languages=de,es", "langid.min_confidence=0.9"},
	} {
		name := "langs-" + strings.NewReplacer(".", "-", "=", "-", ",", "-").Replace(strings.Join(sets, "-"))
		rerun := cachedRun(t, name, st, sets...)
		w := whatIf(t, run, audit.WhatIfOptions{Sets: sets})
		want := num(manifestStage(t, readManifest(t, rerun), "write")["docs_in"])
		if !w.Combined.Exact || w.Combined.DocsKept != want {
			t.Errorf("%v: what-if keeps %d (exact %v), the re-run wrote %d", sets, w.Combined.DocsKept, w.Combined.Exact, want)
		}
		t.Logf("%v: %d kept, %d newly kept, %d newly removed", sets, w.Combined.DocsKept, w.Combined.NewlyKept, w.Combined.NewlyRemoved)
		if w.Combined.NewlyKept == 0 {
			t.Errorf("%v: no document newly kept", sets)
		}
		var kept []string
		for _, row := range readJSONL(t, rerun+"/metrics/quality.jsonl.zst") {
			if row["action"] == "keep" && row["dropped_by"] == nil {
				kept = append(kept, row["doc"].(string))
			}
		}
		if int64(len(kept)) != want {
			t.Errorf("%v: the re-run's quality metrics keep %d, its manifest says %d", sets, len(kept), want)
		}
		if len(w.Changes) != len(sets) || w.Changes[0].Rules[0].KeepWhen != "in" || len(w.Changes[0].Rules[0].FromAllowed) != 1 {
			t.Errorf("%v: changes %+v", sets, w.Changes)
		}
	}
}

// TestWhatIfRejectsWhatItCannotRecompute: global stages, keys that change
// what is measured, unknown stages and keys, non-numbers.
func TestWhatIfRejectsWhatItCannotRecompute(t *testing.T) {
	run := cachedRun(t, "full", fullStages)
	r := openRun(t, run, audit.OpenOptions{})
	for set, want := range map[string]string{
		"near_dedup.threshold=0.5": "global stage",
		"langid.languages=xx":      "unknown language code",
		"quality.language=de":      "numeric limits only",
		"lines.longest_word=500":   "not a threshold",
		"nosuch.fewest_words=3":    "no stage",
		"quality.fewest_words":     "STAGE.KEY=VALUE",
		"quality.fewest_words=-4":  "out of range",
	} {
		_, err := audit.RunWhatIf(r, audit.WhatIfOptions{Sets: []string{set}})
		if err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("--set %s: %v, want an error containing %q", set, err, want)
		}
	}
}
