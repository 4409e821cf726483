package main

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/rhomb/rhomb/internal/atomicfile"
	"github.com/rhomb/rhomb/net/classify"
)

const classifySummary = `Label rows with a saved model. Reads a CSV file with a header (the model's
input columns, in any order, others ignored), applies the model's saved
preprocessing, and writes one output row per input row, in the same order:
the class, then the network's score for each class (for two classes, one
score, headed by the class a positive score means). When the model holds
them, more columns follow: with -probabilities each class's calibrated
probability ("p:CLASS"), the prediction set ("set", classes joined by |)
and the answer ("answer": the class, or "no answer" where the model
abstains; docs/model-file.md, "Decision"). -carry copies chosen
input columns (an id, a timestamp) to the front of each output row, so the
results can be joined back without relying on row order. Streams: any
file size.`

const classifyExample = `  rhomb classify -model pumps.model -data today.csv -o today-labelled.csv -carry site,read_at
  cat today.csv | rhomb classify -model pumps.model > labelled.csv`

func runClassify(e *env, args []string) error {
	fs := newFlags(e, "classify", classifySummary, classifyExample)
	model := fs.String("model", "", "model `file` (required)")
	in := fs.String("data", "-", "CSV `file` to label; - reads standard input")
	out := fs.String("o", "-", "CSV `file` to write; - writes standard output")
	blank := fs.Bool("blank-missing", false, "write an empty output row for a row with a missing cell, instead of failing, when the model does not impute")
	carry := fs.String("carry", "", "comma-separated input `columns` (an id, a timestamp) to copy to the output, first, so results can be joined back")
	sep := fs.String("sep", ",", "field `separator` of the CSV input: one character, or \"tab\"")
	probs := fs.Bool("probabilities", false, "also write each class's calibrated probability (the model must hold a calibration; rhomb train fits one)")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *model == "" {
		return usageError{errors.New("classify: -model names the model file")}
	}
	comma, err := separator(*sep)
	if err != nil {
		return err
	}
	m, err := loadServing(*model)
	if err != nil {
		return err
	}
	if *probs && (m.Decision() == nil || m.Decision().Calibration == nil) {
		return usageError{fmt.Errorf("classify: -probabilities: %s holds no calibration; retrain it with rhomb train, which fits one on the validation rows", *model)}
	}
	var w io.Writer = e.stdout
	var f *atomicfile.File
	if *out != "-" {
		if err := writable("classify", "-o", *out); err != nil {
			return err
		}
		// Write beside the target and rename at the end, so a failed run
		// leaves no half-written output.
		if f, err = atomicfile.Create(*out); err != nil {
			return err
		}
		defer f.Abort()
		w = f
	}
	cw := csv.NewWriter(w)
	if err := classifyRows(e, m, *in, splitList(*carry), comma, cw, *blank, *probs); err != nil {
		return err
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	if f != nil {
		return f.Commit()
	}
	return nil
}

// separator reads the -sep flag.
func separator(s string) (rune, error) {
	if s == "tab" || s == `\t` {
		return '\t', nil
	}
	r := []rune(s)
	if len(r) != 1 || r[0] == '"' || r[0] == '\r' || r[0] == '\n' || r[0] == utf8.RuneError {
		return 0, usageError{fmt.Errorf("-sep %q: give one character other than a quote or a line break (or \"tab\")", s)}
	}
	return r[0], nil
}

// validSeparator reports whether s is a -sep value separator accepts.
func validSeparator(s string) bool {
	_, err := separator(s)
	return err == nil
}

// splitList splits a comma-separated flag value, dropping blanks.
func splitList(s string) []string {
	var out []string
	for _, f := range strings.Split(s, ",") {
		if f = strings.TrimSpace(f); f != "" {
			out = append(out, f)
		}
	}
	return out
}

// scoreHeader names the score columns: one per class, or for a two-class
// model with one signed output, the class a positive score means.
func scoreHeader(m *classify.Model) []string {
	classes := m.Classes()
	if m.Outputs() == 1 {
		if len(classes) == 2 {
			return []string{"score:" + classes[1]}
		}
		return []string{"score"}
	}
	var h []string
	for j := range m.Outputs() {
		name := fmt.Sprintf("output%d", j)
		if classes != nil {
			name = classes[j]
		}
		h = append(h, "score:"+name)
	}
	return h
}

// formatScore writes a score exactly: the shortest decimal that reads
// back to the same value in the model's element type.
func formatScore(m *classify.Model, v float64) string {
	if m.Info().DType == "float32" {
		return strconv.FormatFloat(v, 'g', -1, 32)
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

func classifyRows(e *env, m *classify.Model, in string, carry []string, sep rune, cw *csv.Writer, blank, probs bool) error {
	d := m.Decision()
	abstain := d != nil && d.Abstain != nil
	sets := d != nil && d.Sets != nil
	head := append(append(append([]string(nil), carry...), "class"), scoreHeader(m)...)
	if probs {
		for _, c := range classNames(m) {
			head = append(head, "p:"+c)
		}
	}
	if sets {
		head = append(head, "set")
	}
	if abstain {
		head = append(head, "answer")
	}
	if err := cw.Write(head); err != nil {
		return err
	}
	rec := make([]string, len(head))
	names := classNames(m)
	return forEachRow(e, m, in, "", carry, sep, blank, func(row csvRow) error {
		clear(rec)
		copy(rec, row.carried)
		if !row.answered {
			return cw.Write(rec)
		}
		a := row.answer
		k := len(carry)
		rec[k] = names[a.Class]
		k++
		for _, v := range a.Scores {
			rec[k] = formatScore(m, v)
			k++
		}
		if probs {
			for _, p := range a.Probabilities {
				rec[k] = strconv.FormatFloat(p, 'g', 6, 64)
				k++
			}
		}
		if sets {
			var b strings.Builder
			for i, j := range a.Set {
				if i > 0 {
					b.WriteByte('|')
				}
				b.WriteString(names[j])
			}
			rec[k] = b.String()
			k++
		}
		if abstain {
			rec[k] = names[a.Class]
			if a.Abstained {
				rec[k] = "no answer"
			}
		}
		return cw.Write(rec)
	})
}

// classNames names the model's classes, by index when the file names
// none.
func classNames(m *classify.Model) []string {
	if c := m.Classes(); c != nil {
		return c
	}
	n := max(m.Outputs(), 2)
	out := make([]string, n)
	for i := range out {
		out[i] = strconv.Itoa(i)
	}
	return out
}
