package sweep

import (
	"cmp"
	"math"
	"slices"
)

// Rank returns the results sorted best first, leaving rs as it is. The
// order is total, so the ranking of a set of results is the same however
// they were computed or merged:
//
//  1. runs that succeeded before runs that failed;
//  2. a higher validation score by the sweep's metric (ValScore:
//     accuracy unless the sweep ranks by balanced accuracy, macro-F1 or
//     AUC);
//  3. then a larger minimum normalized margin on the training rows;
//  4. then a smaller margin bound;
//  5. then the smaller point index.
//
// Keys 3 and 4 break ties of the score, which are common: accuracy on n
// validation rows takes only n+1 values. They follow the theory that a
// larger normalized margin and a smaller norm-based bound go with lower
// test error; neither is a prediction of it. A NaN (a measure not taken)
// ranks below every number. Values are compared exactly, as stored.
func Rank(rs []Result) []Result {
	out := slices.Clone(rs)
	slices.SortFunc(out, Compare)
	return out
}

// Compare orders two results as Rank does: negative when a ranks before b.
func Compare(a, b Result) int {
	if c := cmp.Compare(btoi(a.Failed()), btoi(b.Failed())); c != 0 {
		return c
	}
	if c := higher(a.ValScore, b.ValScore); c != 0 {
		return c
	}
	if c := higher(a.MarginMin, b.MarginMin); c != 0 {
		return c
	}
	if c := higher(-a.Bound, -b.Bound); c != 0 {
		return c
	}
	return cmp.Compare(a.Index, b.Index)
}

// higher orders larger values first and NaN last.
func higher(a, b float64) int {
	switch an, bn := math.IsNaN(a), math.IsNaN(b); {
	case an && bn:
		return 0
	case an:
		return 1
	case bn:
		return -1
	}
	return cmp.Compare(b, a)
}

func btoi(b bool) int {
	if b {
		return 1
	}
	return 0
}
