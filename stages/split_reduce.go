package stages

import (
	"winnow/dedup"

	"errors"
	"fmt"
)

// SplitReducer implementations of the global stages: the reduce is cut
// into the index's fixed key partitions (see dedup/exact_split.go,
// dedup/near_split.go and decontaminate's frequency count).

// ReduceParts is the number of hash partitions of exact dedup.
func (s *exactDedupStage) ReduceParts() int {
	if s.paragraph {
		return 0
	}
	return dedup.ExactPartitions
}

// ReduceSome feeds every document but keeps only the records of the hash
// partitions ps, and reduces them.
func (s *exactDedupStage) ReduceSome(ps []int, feed Feed) ([][]byte, error) {
	if s.paragraph {
		return nil, errors.New(s.name + ": scope: paragraph cannot be reduced in parts")
	}
	if err := s.idx.RestrictPartitions(ps); err != nil {
		return nil, fmt.Errorf("%s: %w", s.name, err)
	}
	if err := feed(s.Collect); err != nil {
		return nil, err
	}
	out, err := s.idx.ReduceSplit()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", s.name, err)
	}
	return out, nil
}

// LoadReduced reads every partition's result and writes the key files
// (the kept ids come from feed, in input order).
func (s *exactDedupStage) LoadReduced(results [][]byte, feed Feed) error {
	if s.paragraph {
		return errors.New(s.name + ": scope: paragraph cannot be reduced in parts")
	}
	err := s.idx.LoadSplit(results, func(emit func(uint64, string) error) error {
		return feed(func(order OrderKey, id string, keys any) error {
			if keys == nil {
				return nil // not indexed (empty normalized text)
			}
			return emit(uint64(order), id)
		})
	})
	if err != nil {
		return fmt.Errorf("%s: %w", s.name, err)
	}
	return nil
}
