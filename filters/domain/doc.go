// Package domain scores how much a text looks like a domain learned from
// examples: in-domain documents (the user's manuals, papers, forum
// threads) against background documents (general web text, or the raw
// pool to select from). It is pure: texts in, models and scores out; it
// reads no files.
//
// # Features
//
// A text's words are its maximal runs of Unicode letters and digits,
// lower-cased. Every word (unigram) and every pair of neighbouring words
// (bigram) is hashed to 64 bits and mapped to one of a fixed number of
// buckets (the hashing trick), so a model is one float32 per bucket plus a
// bias whatever the vocabulary: buckets × 4 bytes (1 MiB at the
// classifier's default 2^18 buckets, 40,000 bytes at the importance
// method's 10,000). A text of w words has 2w − 1 features.
//
// # Methods
//
// Classifier: the linear bag-of-n-grams classifier of Joulin et al. 2017
// ("Bag of Tricks for Efficient Text Classification"), trained by SGD on
// the logistic loss with a linearly decaying learning rate, in a shuffled
// order fixed by the seed, classes weighted to equal total weight. A text
// is its bag of features divided by sqrt(n) (where fastText averages, see
// fitClassifier); its score is the predicted probability that it is
// in-domain, σ(bias + Σ weights / sqrt(n)).
//
// Importance: the importance weights of Xie et al. 2023 ("Data Selection
// for Language Models via Importance Resampling"): the examples and the
// pool are each modelled as a bag of hashed n-grams, p(x) = Π_b γ[b]^x[b],
// with γ estimated by counting (add-one smoothed), and a text's log
// importance weight is log p_examples(x) − log p_pool(x) = Σ over its
// features of log γ_ex[b] − log γ_pool[b]. The score is σ of that sum
// divided by the number of features (the mean per-feature log-likelihood
// ratio, so long and short texts compare): 0.5 when both models explain
// the text equally, above when the examples' model explains it better; a
// score of 0.6 means the examples' model gives each feature on average
// e^{logit(0.6)} ≈ 1.5 times the pool's probability. Selecting a fixed
// fraction samples without replacement in proportion to the weights, by
// the Gumbel top-k trick (GumbelKey, TopK), as the paper resamples.
//
// CrossValidate reports k-fold cross-validated accuracy (at score 0.5) and
// AUC, so a user sees whether the domain is separable before a run.
// Models serialise to stable bytes (MarshalBinary) with an xxh3 Hash.
//
// # Accuracy and speed (this 2-core machine, one core)
//
// Python documentation against man pages and general prose
// (testdata/domaindocs, real documents from Debian packages, split by
// source file): classifier held-out accuracy 0.963, AUC 0.993 (5-fold CV
// 0.972 / 0.996); importance AUC 0.996. Scoring runs at about 230 MB/s
// per core for either method (BenchmarkScore); training on 10,000 +
// 10,000 documents of 1-2 KB takes about 1.5 s (classifier, 10 epochs)
// and 0.6 s (importance) (BenchmarkTrain10k).
//
// # Not done
//
// No hidden layer (fastText's rank-constrained embedding): the model is the
// full-rank linear one, which is what a binary task needs. No subword
// (character n-gram) features, no hierarchical softmax (two classes). The
// importance method fits its pool model on the given background, not on a
// separate pass over the whole raw corpus.
package domain
