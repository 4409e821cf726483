package data

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// splitStream is the second word of the PCG seed of the splitters, so a
// split drawn from seed s does not share its random stream with a trainer
// seeded with the same s.
const splitStream = 0x73706c6974 // "split"

// Stratified splits the rows 0 … len(labels)−1 into len(fractions)
// disjoint sets that together hold every row, set i holding a fraction
// fractions[i] of each class, so that a validation or test set has the
// class balance of the whole and a rare class is not left out of it by
// chance.
//
// labels holds the class index (≥ 0) of every row. fractions must be
// positive and sum to 1 (within 1e-9, so 0.7, 0.15, 0.15 is accepted).
// For a class of n_c rows, set i gets ⌊n_c·f_i⌋ rows, and the rows left
// over go one each to the sets with the largest remainders n_c·f_i −
// ⌊n_c·f_i⌋ (largest-remainder rounding); so each set's count of each class
// is within one row of n_c·f_i. Ties between equal remainders go to the
// sets in a cyclic order that starts one set later for each class, so the
// set sizes do not drift towards the first set.
//
// Which rows of a class go to which set, and the order of the rows inside
// each set, are drawn from a PCG seeded with seed: the same labels and seed
// give the same split. An error is returned for an empty labels, a negative
// label, bad fractions, or a set that would be empty.
func Stratified(labels []int, fractions []float64, seed uint64) ([][]int, error) {
	if len(labels) == 0 {
		return nil, errors.New("data: Stratified: no rows")
	}
	if len(fractions) == 0 {
		return nil, errors.New("data: Stratified: no fractions; give one per set, e.g. 0.8, 0.2")
	}
	var total float64
	for i, f := range fractions {
		if !(f > 0) || math.IsInf(f, 0) {
			return nil, fmt.Errorf("data: Stratified: fraction %d is %v; want a positive fraction of the rows", i, f)
		}
		total += f
	}
	if math.Abs(total-1) > 1e-9 {
		return nil, fmt.Errorf("data: Stratified: fractions %v sum to %v, want 1", fractions, total)
	}
	byClass, err := classRows(labels)
	if err != nil {
		return nil, fmt.Errorf("data: Stratified: %w", err)
	}
	rng := rand.New(rand.NewPCG(seed, splitStream))
	k := len(fractions)
	sets := make([][]int, k)
	count := make([]int, k)
	order := make([]int, k)
	rem := make([]float64, k)
	for c, rows := range byClass {
		if len(rows) == 0 {
			continue
		}
		rng.Shuffle(len(rows), func(i, j int) { rows[i], rows[j] = rows[j], rows[i] })
		left := len(rows)
		for i, f := range fractions {
			q := float64(len(rows)) * f
			count[i] = int(math.Floor(q))
			rem[i] = q - float64(count[i])
			left -= count[i]
		}
		for i := range order {
			order[i] = (i + c) % k
		}
		// Stable: equal remainders keep the cyclic order.
		slices.SortStableFunc(order, func(a, b int) int {
			switch {
			case rem[a] > rem[b]:
				return -1
			case rem[a] < rem[b]:
				return 1
			}
			return 0
		})
		// left ≤ k − 1 since the remainders are < 1 and sum to left; it may
		// be −1 or k when the fractions sum to 1 only within 1e-9.
		for i := 0; i < left; i++ {
			count[order[i%k]]++
		}
		for i := 0; left < 0; i++ {
			if j := order[k-1-i%k]; count[j] > 0 {
				count[j]--
				left++
			}
		}
		at := 0
		for i, n := range count {
			sets[i] = append(sets[i], rows[at:at+n]...)
			at += n
		}
	}
	for i, s := range sets {
		if len(s) == 0 {
			return nil, fmt.Errorf("data: Stratified: set %d (fraction %v) would be empty with %d rows; use fewer sets or larger fractions", i, fractions[i], len(labels))
		}
		rng.Shuffle(len(s), func(a, b int) { s[a], s[b] = s[b], s[a] })
	}
	return sets, nil
}

// Fold is one round of k-fold cross-validation: train on Train, evaluate
// on Test. The two are disjoint and together hold every row.
type Fold struct {
	Train, Test []int
}

// Folds splits the rows 0 … len(labels)−1 into k stratified folds for
// cross-validation: every row is in the Test set of exactly one fold, and
// each class is dealt round the folds in turn, so fold i holds ⌊n_c/k⌋ or
// ⌈n_c/k⌉ rows of a class of n_c rows, and the folds' sizes differ by at
// most one row (the deal continues where the previous class stopped).
// Fold i's Train set is every other row.
//
// The deal and the order of the rows inside each set are drawn from a PCG
// seeded with seed: the same labels and seed give the same folds. k must
// be at least 2 and at most the number of rows.
func Folds(labels []int, k int, seed uint64) ([]Fold, error) {
	if k < 2 {
		return nil, fmt.Errorf("data: Folds: k = %d, want at least 2 folds", k)
	}
	if k > len(labels) {
		return nil, fmt.Errorf("data: Folds: k = %d folds but %d rows; a fold would have no test rows", k, len(labels))
	}
	byClass, err := classRows(labels)
	if err != nil {
		return nil, fmt.Errorf("data: Folds: %w", err)
	}
	rng := rand.New(rand.NewPCG(seed, splitStream))
	tests := make([][]int, k)
	next := 0
	for _, rows := range byClass {
		rng.Shuffle(len(rows), func(i, j int) { rows[i], rows[j] = rows[j], rows[i] })
		for _, r := range rows {
			tests[next] = append(tests[next], r)
			next = (next + 1) % k
		}
	}
	folds := make([]Fold, k)
	for i := range folds {
		test := tests[i]
		rng.Shuffle(len(test), func(a, b int) { test[a], test[b] = test[b], test[a] })
		train := make([]int, 0, len(labels)-len(test))
		for j, t := range tests {
			if j != i {
				train = append(train, t...)
			}
		}
		rng.Shuffle(len(train), func(a, b int) { train[a], train[b] = train[b], train[a] })
		folds[i] = Fold{Train: train, Test: test}
	}
	return folds, nil
}

// classRows returns the row indices of every class, in row order, for
// classes 0 … max(labels).
func classRows(labels []int) ([][]int, error) {
	top := -1
	for r, l := range labels {
		if l < 0 {
			return nil, fmt.Errorf("row %d has class %d; class indices start at 0", r, l)
		}
		top = max(top, l)
	}
	byClass := make([][]int, top+1)
	for r, l := range labels {
		byClass[l] = append(byClass[l], r)
	}
	return byClass, nil
}
