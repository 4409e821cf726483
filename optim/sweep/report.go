package sweep

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"
)

// WriteTable writes the first top results of a ranking (all when top ≤ 0)
// as an aligned text table, one row per run: rank, point, its values, the
// validation score (by the sweep's metric, named in the header; accuracy
// by default) and training accuracy, the training set's minimum and mean
// normalized margin, the bound, ρ and the status. A measure that is NaN
// shows as "-"; a failed run shows its error.
func WriteTable(w io.Writer, ranked []Result, top int) error {
	if top <= 0 || top > len(ranked) {
		top = len(ranked)
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	metric := "accuracy"
	if len(ranked) > 0 && ranked[0].Metric != "" {
		metric = ranked[0].Metric
	}
	val := "validation"
	if metric != "accuracy" {
		val = "validation " + metric
	}
	fmt.Fprintf(tw, "rank\tpoint\tρ0\tλ\tη\tT\tseed\t%s\ttrain\tmin margin\tmean margin\tbound\tρ\t status\n", val)
	for i, r := range ranked[:top] {
		status := r.Status
		if r.Failed() {
			status = "failed: " + firstLine(r.Err, 60)
		}
		fmt.Fprintf(tw, "%d\t%d\t%s\t%s\t%s\t%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t %s\n", i+1, r.Index,
			g(r.Rho0), g(r.WeightDecay), g(r.LearningRate), g(r.Temperature), r.Seed,
			fixed(r.ValScore, 4), fixed(r.TrainAccuracy, 4), sig(r.MarginMin, 4), sig(r.MarginMean, 4), sig(r.Bound, 5), sig(r.Rho, 4), status)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if top < len(ranked) {
		_, err := fmt.Fprintf(w, "(%d more runs not shown)\n", len(ranked)-top)
		return err
	}
	return nil
}

func fixed(v float64, prec int) string {
	if math.IsNaN(v) {
		return "-"
	}
	return strconv.FormatFloat(v, 'f', prec, 64)
}

func sig(v float64, prec int) string {
	if math.IsNaN(v) {
		return "-"
	}
	return strconv.FormatFloat(v, 'g', prec, 64)
}

func firstLine(s string, n int) string {
	s, _, _ = strings.Cut(s, "\n")
	if r := []rune(s); len(r) > n {
		return string(r[:n-1]) + "…"
	}
	return s
}
