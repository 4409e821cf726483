package endpoint_test

import (
	"encoding/json"
	"maps"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/classify/endpoint"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// TestUnknownFields: by default a row field that is none of the model's
// inputs is ignored (as the command line ignores extra CSV columns) and
// listed once, sorted, in "ignored_fields"; the scores are those of the
// row without it. With RefuseUnknownFields the same request gets 400
// naming the row and the first unknown field in byte order.
func TestUnknownFields(t *testing.T) {
	m := load(t, models(t)[0])
	extra := strings.Replace(goodRow, "{", `{"operator_note": "checked", "colour": "red",`, 1)
	body := `{"rows": [` + goodRow + `, ` + extra + `, ` + strings.Replace(extra, `"checked"`, `null`, 1) + `]}`
	want, err := m.ClassifyMap(nil, goodMap)
	if err != nil {
		t.Fatal(err)
	}

	rec, _ := post(t, endpoint.New(m, endpoint.Options{Log: quiet}), body)
	var resp endpoint.Response
	if err := json.Unmarshal(rec.Body.Bytes(), &resp); err != nil || rec.Code != 200 {
		t.Fatalf("status %d (%v): %s", rec.Code, err, rec.Body)
	}
	if !slices.Equal(resp.IgnoredFields, []string{"colour", "operator_note"}) {
		t.Errorf("ignored_fields %q; want [colour operator_note]", resp.IgnoredFields)
	}
	for i, a := range resp.Answers {
		if !slices.Equal(a.Scores, want.Scores) {
			t.Errorf("row %d: scores %v; without the extra fields %v", i, a.Scores, want.Scores)
		}
	}
	if rec, _ := post(t, endpoint.New(m, endpoint.Options{Log: quiet}), `{"rows": [`+goodRow+`]}`); strings.Contains(rec.Body.String(), "ignored_fields") {
		t.Errorf("a request without unknown fields lists ignored_fields: %s", rec.Body)
	}

	rec, out := post(t, endpoint.New(m, endpoint.Options{RefuseUnknownFields: true, Log: quiet}), body)
	e, _ := out["error"].(map[string]any)
	if rec.Code != 400 || e["row"] != 1.0 || e["field"] != "colour" {
		t.Errorf("refusing: status %d, error %v; want 400 at row 1, field colour", rec.Code, e)
	}
}

// TestFilledFields: a row that leaves a field absent, null or a
// missing-value marker is classified with the pipeline's fill value for
// that field — the training mean for a number, the most frequent training
// category for a category (prep.Encoding.Fill, FillCategory) — and its answer
// lists the field in "filled_fields"; a complete row lists none.
func TestFilledFields(t *testing.T) {
	m := load(t, models(t)[0])
	p := m.Pipeline()
	if !p.Impute || !slices.Contains(p.Missing, "NA") {
		t.Fatalf("the demo pipeline should impute and read NA as missing: %v %q", p.Impute, p.Missing)
	}
	fill := map[string]string{}
	for _, s := range p.Encodings {
		if s.Kind == prep.Numeric {
			fill[s.Name] = strconv.FormatFloat(s.Fill, 'g', -1, 64) // shortest text that reads back to the same bits
		} else {
			fill[s.Name] = s.FillCategory
		}
	}
	rows := []struct {
		json   string
		filled []string
	}{
		{goodRow, nil},
		{strings.Replace(goodRow, `"temp_rise_c": 20.30,`, ``, 1), []string{"temp_rise_c"}},
		{strings.Replace(goodRow, `20.30`, `null`, 1), []string{"temp_rise_c"}},
		{strings.Replace(strings.Replace(goodRow, `20.30`, `"NA"`, 1), `"river-intake"`, `null`, 1), []string{"site", "temp_rise_c"}},
	}
	var parts []string
	for _, r := range rows {
		parts = append(parts, r.json)
	}
	rec, _ := post(t, endpoint.New(m, endpoint.Options{Log: quiet}), `{"rows": [`+strings.Join(parts, ", ")+`]}`)
	var resp endpoint.Response
	if err := json.Unmarshal(rec.Body.Bytes(), &resp); err != nil || rec.Code != 200 {
		t.Fatalf("status %d (%v): %s", rec.Code, err, rec.Body)
	}
	for i, r := range rows {
		a := resp.Answers[i]
		if !slices.Equal(a.FilledFields, r.filled) {
			t.Errorf("row %d: filled_fields %q; want %q", i, a.FilledFields, r.filled)
		}
		cells := maps.Clone(goodMap)
		for _, f := range r.filled {
			cells[f] = fill[f]
		}
		want, err := m.ClassifyMap(nil, cells)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(a.Scores, want.Scores) {
			t.Errorf("row %d: scores %v; with the fill values written in %v", i, a.Scores, want.Scores)
		}
	}
}

// TestMissingWithoutFill: a model whose pipeline does not impute refuses a
// row with a missing field with 400 naming the row and the field.
func TestMissingWithoutFill(t *testing.T) {
	split, err := demo.Pumps[float64](600)
	if err != nil {
		t.Fatal(err)
	}
	p := *split.Pipeline
	p.Impute = false
	n, err := net.NewBuilder[float64](split.Train.Features).Dense("h", 4).ReLU("r").Readout("out", split.Train.Outputs).Build()
	if err != nil {
		t.Fatal(err)
	}
	n.Init(net.InitSettings{Seed: 1})
	path := filepath.Join(t.TempDir(), "strict.model")
	if err := modelfile.Save(path, &modelfile.Model[float64]{Network: n, Pipeline: &p, Classes: split.Train.Classes}); err != nil {
		t.Fatal(err)
	}
	m, err := classify.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	h := endpoint.New(m, endpoint.Options{Log: quiet})
	rec, out := post(t, h, `{"rows": [`+goodRow+`, `+strings.Replace(goodRow, `20.30`, `null`, 1)+`]}`)
	e, _ := out["error"].(map[string]any)
	if rec.Code != 400 || e["row"] != 1.0 || e["field"] != "temp_rise_c" {
		t.Fatalf("status %d, error %v; want 400 at row 1, field temp_rise_c", rec.Code, e)
	}
	if rec, _ := post(t, h, `{"rows": [`+goodRow+`]}`); rec.Code != 200 || strings.Contains(rec.Body.String(), "filled_fields") {
		t.Fatalf("a complete row: %d %s", rec.Code, rec.Body)
	}
}
