package main

// Exit codes and messages for bad input. Each case checks the status the
// package documentation promises (3 bad data, 4 bad model file, 2 bad
// command line) and that the message says where the problem is: the file,
// and the line, column and field where they apply.
//
// Positions are written file:line:column. Line and column are 1-based and
// the column counts bytes, as encoding/csv's FieldPos does (Go standard
// library documentation of csv.Reader.FieldPos) and as data.ReadCSV
// documents for ParseError.Column; the expected column is computed from
// the line's text, never typed in.

import (
	"crypto/sha256"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// at returns "path:line:column" for field number k (1-based) of the given
// 1-based line of content: the field's byte column. The test files hold no
// quoted fields, so fields are found by splitting on commas.
func at(t *testing.T, path, content string, line, k int) string {
	t.Helper()
	fields := strings.Split(strings.Split(content, "\n")[line-1], ",")
	if k > len(fields) {
		t.Fatalf("line %d has %d fields, not %d", line, len(fields), k)
	}
	col := 1
	for _, f := range fields[:k-1] {
		col += len(f) + 1
	}
	return path + ":" + strconv.Itoa(line) + ":" + strconv.Itoa(col)
}

// expand replaces each piece "@L:K" by the position of field K of line L.
func expand(t *testing.T, r result, path, content string, pieces []string) []string {
	t.Helper()
	out := []string{path}
	for _, p := range pieces {
		if pos, ok := strings.CutPrefix(p, "@"); ok {
			l, k, _ := strings.Cut(pos, ":")
			line, err1 := strconv.Atoi(l)
			field, err2 := strconv.Atoi(k)
			if err1 != nil || err2 != nil {
				t.Fatalf("bad position %q", p)
			}
			// The position ends the "where" part of the message: a space
			// (before the column name) or a colon follows it.
			pos := at(t, path, content, line, field)
			p = pos + " "
			if !strings.Contains(r.stderr, p) {
				p = pos + ":"
			}
		}
		out = append(out, p)
	}
	return out
}

func TestTrainBadData(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		name    string
		content string
		args    []string
		// pieces the message must hold; "@L:K" is replaced by the position
		// of field K on line L.
		pieces []string
	}{
		{
			name:    "no label column",
			content: "a,b,y\n1,2,p\n3,4,q\n",
			args:    []string{"-label", "kind"},
			pieces:  []string{":1 ", `(column "kind")`, data.ErrNoLabel.Error(), `"a", "b", "y"`, "-label"},
		},
		{
			name:    "missing value",
			content: "a,b,y\n1,2,p\n3,NA,q\n",
			args:    []string{"-missing", "fail"},
			pieces:  []string{"@3:2", `(column "b")`, data.ErrMissing.Error(), `"NA"`, "-missing drop", "-missing impute"},
		},
		{
			name:    "empty cell",
			content: "a,b,y\n1,2,p\n3,,q\n",
			args:    []string{"-missing", "fail"},
			pieces:  []string{"@3:2", `(column "b")`, data.ErrMissing.Error(), "-missing"},
		},
		{
			name:    "not a number",
			content: "a,b,y\n1,2,p\n3,4x,q\n",
			pieces:  []string{"@3:2", `(column "b")`, data.ErrNotNumber.Error(), `"4x"`, "-kind", "=categorical"},
		},
		{
			name:    "short row",
			content: "a,b,y\n1,2,p\n3,4\n",
			pieces:  []string{":3: ", data.ErrRagged.Error(), "2 fields, the header 3"},
		},
		{
			name:    "long row",
			content: "a,b,y\n1,2,p\n3,4,q,9\n",
			pieces:  []string{"@3:4", data.ErrRagged.Error(), "4 fields, the header 3"},
		},
		{
			name:    "empty file",
			content: "",
			pieces:  []string{": " + data.ErrEmpty.Error()},
		},
		{
			name:    "header only",
			content: "a,b,y\n",
			pieces:  []string{": " + data.ErrEmpty.Error(), "header but no rows"},
		},
		{
			name:    "one class",
			content: "a,b,y\n1,2,p\n3,4,p\n",
			pieces:  []string{`(column "y")`, data.ErrOneClass.Error(), `"p"`},
		},
		{
			name:    "CSV syntax",
			content: "a,b,y\n1,2,p\n3,\"4,q\n",
			pieces:  []string{":3:", "CSV syntax"},
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := writeFile(t, filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-")+".csv"), tc.content)
			out := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-")+".model")
			args := []string{"train", "-data", path, "-label", "y", "-hidden", "4", "-epochs", "1", "-quiet", "-o", out}
			args = append(args, tc.args...)
			r := run(t, nil, args...)
			want(t, r, exitBadData, expand(t, r, path, tc.content, tc.pieces)...)
			if _, err := os.Stat(out); err == nil {
				t.Errorf("bad data still wrote the model %s", out)
			}
		})
	}
}

// TestServeBadData feeds classify and check rows that the model cannot
// take. The model's inputs are x1, x2 (numeric) and site (north, south).
func TestServeBadData(t *testing.T) {
	dir := t.TempDir()
	_, model := sensorModel(t, dir, "-missing", "fail") // a model that refuses missing cells
	for _, tc := range []struct {
		name     string
		commands []string // classify, check or both
		content  string
		pieces   []string // "@L:K" as in TestTrainBadData
	}{
		{
			name:     "no input column",
			commands: []string{"classify", "check"},
			content:  "x1,site,state\n0.5,north,on\n",
			pieces:   []string{":1: ", data.ErrNoColumn.Error(), "x2"},
		},
		{
			name:     "no label column",
			commands: []string{"check"},
			content:  "x1,x2,site\n0.5,1,north\n",
			pieces:   []string{":1 ", `(column "state")`, "-label"},
		},
		{
			name:     "not a number",
			commands: []string{"classify", "check"},
			content:  "x1,x2,site,state\n0.5,1,north,on\n0.25,high,south,off\n",
			pieces:   []string{"@3:2", `(column "x2")`, data.ErrNotNumber.Error(), `"high"`},
		},
		{
			name:     "missing value",
			commands: []string{"classify", "check"},
			content:  "x1,x2,site,state\n0.5,1,north,on\n0.25,NA,south,off\n",
			pieces:   []string{"@3:2", `(column "x2")`, data.ErrMissing.Error()},
		},
		{
			name:     "unknown category",
			commands: []string{"classify", "check"},
			content:  "x1,x2,site,state\n0.5,1,north,on\n0.25,1,west,off\n",
			pieces:   []string{"@3:3", `(column "site")`, data.ErrUnknownCategory.Error(), `"west"`},
		},
		{
			name:     "short row",
			commands: []string{"classify", "check"},
			content:  "x1,x2,site,state\n0.5,1,north,on\n0.25,1\n",
			pieces:   []string{":3: ", data.ErrRagged.Error(), `"site"`},
		},
		{
			// A decimal comma splits a value in two: the row has one
			// field too many. Before, classify and check read the fields
			// the model named and gave a confident wrong answer.
			name:     "decimal comma",
			commands: []string{"classify", "check"},
			content:  "x1,x2,site,state\n0.5,1,north,on\n0,25,1,south,off\n",
			pieces:   []string{":3:5: ", data.ErrRagged.Error(), "decimal comma", "-sep"},
		},
		{
			// Before, the last of two columns of one name was used.
			name:     "duplicate header",
			commands: []string{"classify", "check"},
			content:  "x1,x2,site,x2,state\n0.5,1,north,2,on\n",
			pieces:   []string{":1:4 ", data.ErrDuplicateHeader.Error(), `"x2" is field 2 and field 4`},
		},
		{
			name:     "unknown class",
			commands: []string{"check"},
			content:  "x1,x2,site,state\n0.5,1,north,on\n0.25,1,south,standby\n",
			pieces:   []string{":3 ", `(column "state")`, `"standby"`},
		},
		{
			name:     "empty file",
			commands: []string{"classify", "check"},
			content:  "",
			pieces:   []string{": " + data.ErrEmpty.Error()},
		},
		{
			name:     "header only",
			commands: []string{"check"},
			content:  "x1,x2,site,state\n",
			pieces:   []string{": " + data.ErrEmpty.Error()},
		},
	} {
		for _, cmd := range tc.commands {
			t.Run(cmd+"/"+tc.name, func(t *testing.T) {
				path := writeFile(t, filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-")+".csv"), tc.content)
				r := run(t, nil, cmd, "-model", model, "-data", path)
				want(t, r, exitBadData, expand(t, r, path, tc.content, tc.pieces)...)
			})
		}
	}
}

func TestBadModelFile(t *testing.T) {
	dir := t.TempDir()
	csv, model := sensorModel(t, dir)
	good, err := os.ReadFile(model)
	if err != nil {
		t.Fatal(err)
	}
	// One bit flipped in the last byte before the trailing SHA-256 sum: in
	// the tensor data, which only the checksum protects.
	flipped := append([]byte(nil), good...)
	flipped[len(flipped)-sha256.Size-1] ^= 0x10
	for _, tc := range []struct {
		name    string
		content []byte
		cause   error
	}{
		{"bit flip", flipped, modelfile.ErrChecksum},
		{"cut in half", good[:len(good)/2], modelfile.ErrTruncated},
		{"cut in the data", good[:len(good)-sha256.Size-8], modelfile.ErrTruncated},
		{"sum cut off", good[:len(good)-sha256.Size/2], nil},
		{"ten bytes", good[:10], modelfile.ErrTruncated},
		{"empty", nil, modelfile.ErrTruncated},
		{"a CSV file", []byte("x1,x2,site,state\n0.5,1,north,on\n0.25,1,west,off\n0.25,1,west,off\n"), modelfile.ErrMagic},
	} {
		path := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-")+".model")
		if err := os.WriteFile(path, tc.content, 0o644); err != nil {
			t.Fatal(err)
		}
		for _, args := range [][]string{
			{"describe", "-model", path},
			{"classify", "-model", path, "-data", csv},
			{"check", "-model", path, "-data", csv},
		} {
			t.Run(tc.name+"/"+args[0], func(t *testing.T) {
				pieces := []string{path}
				if tc.cause != nil {
					pieces = append(pieces, tc.cause.Error())
				}
				want(t, run(t, nil, args...), exitBadModel, pieces...)
			})
		}
	}
	t.Run("no such file", func(t *testing.T) {
		path := filepath.Join(dir, "absent.model")
		want(t, run(t, nil, "describe", "-model", path), exitBadModel, path)
	})
}

func TestResumeErrors(t *testing.T) {
	dir := t.TempDir()
	csv, model := sensorModel(t, dir, "-save-every", "1")
	ckpt := model + ".checkpoint"
	if _, err := os.Stat(ckpt); err != nil {
		t.Fatalf("-save-every 1 wrote no checkpoint: %v", err)
	}
	out := filepath.Join(dir, "resumed.model")
	t.Run("plain model", func(t *testing.T) {
		want(t, run(t, nil, "train", "-resume", model, "-o", out), exitBadModel, model, "not a checkpoint")
	})
	t.Run("no such checkpoint", func(t *testing.T) {
		absent := filepath.Join(dir, "absent.checkpoint")
		want(t, run(t, nil, "train", "-resume", absent, "-o", out), exitBadModel, absent)
	})
	for _, conflict := range [][]string{{"-momentum", "0.5"}, {"-data", csv}, {"-seed", "2"}, {"-hidden", "4"}, {"-temp", "0"}} {
		t.Run("conflict "+conflict[0], func(t *testing.T) {
			args := append([]string{"train", "-resume", ckpt, "-o", out}, conflict...)
			want(t, run(t, nil, args...), exitUsage, conflict[0]+" cannot change when resuming", ckpt)
		})
	}
	if _, err := os.Stat(out); err == nil {
		t.Errorf("a failed resume wrote %s", out)
	}
}
