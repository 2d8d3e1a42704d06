package domain

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"

	"github.com/zeebo/xxh3"
)

// Method is how a model was trained.
type Method uint8

const (
	// Classifier is the logistic-loss linear classifier of Joulin et al.
	// 2017 over hashed unigrams and bigrams.
	Classifier Method = 1
	// Importance is the hashed n-gram importance weighting of Xie et al.
	// 2023.
	Importance Method = 2
)

// String returns the method's name as written in a spec.
func (m Method) String() string {
	switch m {
	case Classifier:
		return "classifier"
	case Importance:
		return "importance"
	}
	return fmt.Sprintf("method(%d)", uint8(m))
}

// ParseMethod reads a method name ("classifier" or "importance").
func ParseMethod(s string) (Method, error) {
	switch s {
	case "classifier":
		return Classifier, nil
	case "importance":
		return Importance, nil
	}
	return 0, fmt.Errorf("unknown domain method %q (want classifier or importance)", s)
}

// Model scores texts: one float32 weight per hash bucket plus a bias.
//
// For Classifier, Weights are the linear weights over the text's bag of
// features scaled by 1/sqrt(n) for n features, and the score is the
// predicted probability σ(Bias + sum of the features' weights / sqrt(n)).
//
// For Importance, Weights[b] = log γ_examples[b] − log γ_pool[b] (the
// per-feature log-likelihood ratio of the two bag-of-n-grams models), Bias
// is 0, the text's log importance weight is the sum of its features'
// weights and its score is σ(that sum / number of features): 0.5 when the
// text is as likely under both models, towards 1 when the examples' model
// explains it better.
type Model struct {
	Method  Method
	Bias    float32
	Weights []float32
}

// Buckets returns the number of hash buckets.
func (m *Model) Buckets() int { return len(m.Weights) }

// SizeBytes is the size of the weight table: buckets × 4 bytes.
func (m *Model) SizeBytes() int { return 4 * len(m.Weights) }

// Eval returns the text's score in [0, 1], the log-odds it comes from
// (for Importance the length-normalised log importance weight) and the
// number of features. A text without words
// scores σ(Bias) with logit Bias and 0 features.
func (m *Model) Eval(text string) (score, logit float64, features int) {
	s := wordScanner{text: text}
	w := m.Weights
	buckets := uint64(len(w))
	var sum float64
	n := 0
	prev, ok := s.next()
	if ok {
		sum += float64(w[bucketOf(prev, buckets)])
		n++
		for {
			cur, ok := s.next()
			if !ok {
				break
			}
			sum += float64(w[bucketOf(cur, buckets)]) + float64(w[bucketOf(bigramHash(prev, cur), buckets)])
			n += 2
			prev = cur
		}
	}
	return m.fromSum(sum, n)
}

// Score returns the text's score in [0, 1] (see Eval).
func (m *Model) Score(text string) float64 {
	s, _, _ := m.Eval(text)
	return s
}

// LogWeight returns the text's log importance weight: the sum of its
// features' weights (for Importance, log p_examples(x) − log p_pool(x)
// under the two bag-of-n-grams models).
func (m *Model) LogWeight(text string) float64 {
	_, logit, n := m.Eval(text)
	if n == 0 {
		return 0
	}
	return (logit - float64(m.Bias)) * m.norm(n)
}

// evalFeatures is Eval over precomputed features.
func (m *Model) evalFeatures(feats []uint32) (score, logit float64) {
	var sum float64
	for _, b := range feats {
		sum += float64(m.Weights[b])
	}
	score, logit, _ = m.fromSum(sum, len(feats))
	return score, logit
}

// fromSum turns the sum of a text's feature weights into its logit: the
// classifier divides by sqrt(n), the importance method by n.
func (m *Model) fromSum(sum float64, n int) (score, logit float64, features int) {
	logit = float64(m.Bias)
	if n > 0 {
		logit += sum / m.norm(n)
	}
	return sigmoid(logit), logit, n
}

// norm is the divisor of a text's weight sum: sqrt(n) for Classifier (the
// document vector has unit L2 norm when no feature repeats), n for
// Importance (the mean per-feature log ratio).
func (m *Model) norm(n int) float64 {
	if m.Method == Classifier {
		return math.Sqrt(float64(n))
	}
	return float64(n)
}

// sigmoid is the logistic function, computed without overflow.
func sigmoid(x float64) float64 {
	if x >= 0 {
		return 1 / (1 + math.Exp(-x))
	}
	e := math.Exp(x)
	return e / (1 + e)
}

// modelMagic opens a serialised model; the last byte is the format version.
var modelMagic = [4]byte{'w', 'd', 'm', 1}

// headerSize is the serialised header: magic (4), method (1), three zero
// bytes, bucket count (uint32), bias (float32).
const headerSize = 16

// MarshalBinary encodes the model: a 16-byte header (magic "wdm\x01",
// method, 3 zero bytes, bucket count and bias, little-endian) and the
// weights as little-endian float32. Equal models give equal bytes.
func (m *Model) MarshalBinary() ([]byte, error) {
	if err := m.validate(); err != nil {
		return nil, err
	}
	out := make([]byte, headerSize+4*len(m.Weights))
	copy(out, modelMagic[:])
	out[4] = byte(m.Method)
	binary.LittleEndian.PutUint32(out[8:], uint32(len(m.Weights)))
	binary.LittleEndian.PutUint32(out[12:], math.Float32bits(m.Bias))
	for i, w := range m.Weights {
		binary.LittleEndian.PutUint32(out[headerSize+4*i:], math.Float32bits(w))
	}
	return out, nil
}

// UnmarshalBinary decodes what MarshalBinary wrote, refusing anything else
// (wrong magic or version, unknown method, wrong length, non-finite
// weights).
func (m *Model) UnmarshalBinary(data []byte) error {
	if len(data) < headerSize || [4]byte(data[:4]) != modelMagic {
		return errors.New("not a domain model (bad magic or version)")
	}
	method := Method(data[4])
	if data[5] != 0 || data[6] != 0 || data[7] != 0 {
		return errors.New("domain model: bad header")
	}
	n := binary.LittleEndian.Uint32(data[8:])
	if uint64(len(data)) != headerSize+4*uint64(n) {
		return fmt.Errorf("domain model: %d bytes, want %d for %d buckets", len(data), headerSize+4*uint64(n), n)
	}
	out := Model{Method: method, Bias: math.Float32frombits(binary.LittleEndian.Uint32(data[12:])), Weights: make([]float32, n)}
	for i := range out.Weights {
		out.Weights[i] = math.Float32frombits(binary.LittleEndian.Uint32(data[headerSize+4*i:]))
	}
	if err := out.validate(); err != nil {
		return err
	}
	*m = out
	return nil
}

func (m *Model) validate() error {
	if m.Method != Classifier && m.Method != Importance {
		return fmt.Errorf("domain model: unknown method %d", m.Method)
	}
	if len(m.Weights) == 0 || len(m.Weights) > MaxBuckets {
		return fmt.Errorf("domain model: %d buckets, want 1..%d", len(m.Weights), MaxBuckets)
	}
	if isBad(m.Bias) {
		return errors.New("domain model: bias is not finite")
	}
	for i, w := range m.Weights {
		if isBad(w) {
			return fmt.Errorf("domain model: weight %d is not finite", i)
		}
	}
	return nil
}

func isBad(f float32) bool {
	return math.IsNaN(float64(f)) || math.IsInf(float64(f), 0)
}

// Hash returns the xxh3-64 digest of the model's serialised bytes as 16
// hex digits (the form the run manifest uses for files).
func (m *Model) Hash() (string, error) {
	b, err := m.MarshalBinary()
	if err != nil {
		return "", err
	}
	return fmt.Sprintf("%016x", xxh3.Hash(b)), nil
}
