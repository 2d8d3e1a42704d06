package domain

import (
	"fmt"
	"sort"
)

// CV is the result of k-fold cross-validation: every example and
// background document is scored once by a model trained without its fold.
type CV struct {
	Folds      int
	Examples   int
	Background int
	// Accuracy is the share of documents on the right side of score 0.5
	// (examples at or above, background below).
	Accuracy float64
	// AUC is the area under the ROC curve of the pooled held-out scores:
	// the chance that a random example outscores a random background
	// document, ties counting one half (the Mann-Whitney statistic).
	AUC float64
	// FoldAccuracy is the accuracy within each fold.
	FoldAccuracy []float64
}

// CrossValidate trains k models, each without one of k folds, and scores
// the held-out documents. Folds are stratified: each class is shuffled
// with the seed and dealt round-robin, so every fold has about 1/k of the
// examples and of the background. Each class needs at least k documents.
func CrossValidate(examples, background []string, k int, opt Options) (CV, error) {
	o, err := opt.withDefaults()
	if err != nil {
		return CV{}, err
	}
	if k < 2 {
		return CV{}, fmt.Errorf("cross-validation needs at least 2 folds, not %d", k)
	}
	if len(examples) < k || len(background) < k {
		return CV{}, fmt.Errorf("%d-fold cross-validation needs at least %d examples and %d background documents (have %d and %d)", k, k, k, len(examples), len(background))
	}
	pos, neg := featurize(examples, o), featurize(background, o)
	rng := splitmix{state: o.Seed ^ 0x5ca1ab1e}
	foldOf := func(n int) []int {
		order := make([]int, n)
		for i := range order {
			order[i] = i
		}
		rng.shuffle(order)
		f := make([]int, n)
		for r, i := range order {
			f[i] = r % k
		}
		return f
	}
	fp, fn := foldOf(len(pos)), foldOf(len(neg))
	posScores := make([]float64, len(pos))
	negScores := make([]float64, len(neg))
	res := CV{Folds: k, Examples: len(pos), Background: len(neg)}
	right := 0
	for fold := 0; fold < k; fold++ {
		var trp, trn [][]uint32
		for i, f := range pos {
			if fp[i] != fold {
				trp = append(trp, f)
			}
		}
		for i, f := range neg {
			if fn[i] != fold {
				trn = append(trn, f)
			}
		}
		m, err := train(trp, trn, o)
		if err != nil {
			return CV{}, err
		}
		foldRight, foldN := 0, 0
		for i, f := range pos {
			if fp[i] == fold {
				posScores[i], _ = m.evalFeatures(f)
				foldN++
				if posScores[i] >= 0.5 {
					foldRight++
				}
			}
		}
		for i, f := range neg {
			if fn[i] == fold {
				negScores[i], _ = m.evalFeatures(f)
				foldN++
				if negScores[i] < 0.5 {
					foldRight++
				}
			}
		}
		right += foldRight
		res.FoldAccuracy = append(res.FoldAccuracy, float64(foldRight)/float64(foldN))
	}
	res.Accuracy = float64(right) / float64(len(pos)+len(neg))
	res.AUC = AUC(posScores, negScores)
	return res, nil
}

// AUC returns the area under the ROC curve for scores of positives and
// negatives: the Mann-Whitney U statistic over |pos|·|neg|, ties counting
// one half. It is NaN when either list is empty.
func AUC(pos, neg []float64) float64 {
	type sc struct {
		v   float64
		pos bool
	}
	all := make([]sc, 0, len(pos)+len(neg))
	for _, v := range pos {
		all = append(all, sc{v, true})
	}
	for _, v := range neg {
		all = append(all, sc{v, false})
	}
	if len(pos) == 0 || len(neg) == 0 {
		return nan()
	}
	sort.Slice(all, func(i, j int) bool { return all[i].v < all[j].v })
	// U = sum over positives of (negatives below + half the tied negatives).
	var u float64
	negBelow := 0
	for i := 0; i < len(all); {
		j := i
		tp, tn := 0, 0
		for j < len(all) && all[j].v == all[i].v {
			if all[j].pos {
				tp++
			} else {
				tn++
			}
			j++
		}
		u += float64(tp) * (float64(negBelow) + float64(tn)/2)
		negBelow += tn
		i = j
	}
	return u / (float64(len(pos)) * float64(len(neg)))
}
