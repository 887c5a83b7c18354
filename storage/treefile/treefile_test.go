package treefile

import (
	"bytes"
	"compress/gzip"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"splitledger/importance/forest"
)

func TestSniff(t *testing.T) {
	gz := func(s string) []byte {
		var b bytes.Buffer
		w := gzip.NewWriter(&b)
		w.Write([]byte(s))
		w.Close()
		return b.Bytes()
	}
	// Format signatures: XGBoost 1.7.4 save_model / get_dump output (see
	// testdata/models), LightGBM's save_model header ("tree", "version=v4").
	for _, c := range []struct {
		name string
		head []byte
		want Format
		err  error
	}{
		{"xgboost json", []byte(`{"learner":{"attributes":{}}`), FormatXGBoostJSON, nil},
		{"xgboost json with spaces and BOM", []byte("\xef\xbb\xbf \n{ \"learner\" : {"), FormatXGBoostJSON, nil},
		{"dump json", []byte("[\n  { \"nodeid\": 0, \"depth\": 0"), FormatXGBoostDumpJSON, nil},
		{"empty dump json", []byte("[]"), FormatXGBoostDumpJSON, nil},
		{"dump text", []byte("booster[0]:\n0:[beta<1] yes=1,no=2"), FormatXGBoostDumpText, nil},
		{"dump text CRLF", []byte("booster[0]:\r\n0:leaf=1\r\n"), FormatXGBoostDumpText, nil},
		{"lightgbm text", []byte("tree\nversion=v4\nnum_class=1\n"), FormatLightGBMText, nil},
		{"gzip json", gz(`{"learner":{}}`), FormatXGBoostJSON, nil},
		{"gzip without its trailer", func() []byte { b := gz("booster[0]:\n0:leaf=1\n"); return b[:len(b)-8] }(), FormatXGBoostDumpText, nil},
		{"ubjson", []byte("{L\x00\x00\x00\x00\x00\x00\x00\x07learner{"), "", ErrUnsupported},
		{"lightgbm json dump", []byte(`{"name":"tree","version":"v4","tree_info":[{"tree_structure":{}}]}`), "", ErrUnsupported},
		{"json object without learner", []byte(`{"trees":[]}`), "", ErrUnknownFormat},
		{"json list of numbers", []byte(`[1, 2]`), "", ErrUnknownFormat},
		{"plain text", []byte("hello world\n"), "", ErrUnknownFormat},
		{"tree without version", []byte("tree\nnum_class=1\n"), "", ErrUnknownFormat},
		{"empty", nil, "", ErrUnknownFormat},
		{"blank", []byte(" \n\t"), "", ErrUnknownFormat},
		{"bad gzip", []byte{0x1f, 0x8b, 0, 0}, "", ErrUnknownFormat},
	} {
		t.Run(c.name, func(t *testing.T) {
			got, err := Sniff(c.head)
			if c.err != nil {
				if !errors.Is(err, c.err) {
					t.Fatalf("Sniff = %q, %v; want error %v", got, err, c.err)
				}
				return
			}
			if err != nil || got != c.want {
				t.Fatalf("Sniff = %q, %v; want %q", got, err, c.want)
			}
		})
	}
}

func TestErrorMessage(t *testing.T) {
	cause := errors.New("child index 99 out of range (tree has 31 nodes)")
	for _, c := range []struct {
		err  *Error
		want string
	}{
		{&Error{File: "models/cand.json", Tree: 12, Node: 7, Err: cause}, "models/cand.json: tree 12 node 7: child index 99 out of range (tree has 31 nodes)"},
		{&Error{File: "dump.txt", Tree: -1, Node: -1, Line: 118, Err: errors.New("bad leaf value")}, "dump.txt:118: bad leaf value"},
		{&Error{File: "dump.txt", Tree: 3, Node: 5, Line: 40, Err: errors.New("x")}, "dump.txt:40: tree 3 node 5: x"},
		{&Error{File: "m.json", Tree: 2, Node: -1, Err: errors.New("no nodes")}, "m.json: tree 2: no nodes"},
		{&Error{File: "m.json", Tree: -1, Node: -1, Err: errors.New("two\nlines")}, "m.json: two lines"},
	} {
		if got := c.err.Error(); got != c.want {
			t.Errorf("%q, want %q", got, c.want)
		}
	}
	if e := (&Error{File: "f", Tree: -1, Node: -1, Err: cause}); !errors.Is(e, cause) {
		t.Errorf("Error does not unwrap to its cause")
	}
}

func TestReadNames(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct {
		name    string
		content string
		want    []string
		line    int // expected error line; 0 with want == nil: error without line
	}{
		{"plain", "a\nb\nc", []string{"a", "b", "c"}, 0},
		{"trailing blank lines", "a\nb\n\n\n", []string{"a", "b"}, 0},
		{"CRLF and spaces", "\xef\xbb\xbf a \r\nb\r\n", []string{"a", "b"}, 0},
		{"duplicate", "a\nb\na\n", nil, 3},
		{"blank in the middle", "a\n\nb\n", nil, 2},
		{"empty", "", nil, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			path := filepath.Join(dir, strings.ReplaceAll(c.name, " ", "_")+".txt")
			if err := os.WriteFile(path, []byte(c.content), 0o644); err != nil {
				t.Fatal(err)
			}
			got, err := ReadNames(path)
			if c.want != nil {
				if err != nil || !reflect.DeepEqual(got, c.want) {
					t.Fatalf("ReadNames = %q, %v; want %q", got, err, c.want)
				}
				return
			}
			var fe *Error
			if !errors.As(err, &fe) || fe.File != path || fe.Line != c.line || !errors.Is(err, ErrFeatureNames) {
				t.Fatalf("error %v, want an *Error at %s line %d wrapping ErrFeatureNames", err, path, c.line)
			}
		})
	}
	if _, err := ReadNames(filepath.Join(dir, "absent.txt")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v", err)
	}
}

// mutateJSON decodes an XGBoost JSON model without non-finite tokens, lets
// edit change it, and encodes it again.
func mutateJSON(t *testing.T, path string, edit func(m map[string]any)) []byte {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("reference fixture missing: %v", err)
	}
	var m map[string]any
	if err := json.Unmarshal(raw, &m); err != nil {
		t.Fatal(err)
	}
	edit(m)
	out, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// jpath walks nested JSON objects and arrays (string keys, int indexes).
func jpath(v any, keys ...any) any {
	for _, k := range keys {
		switch k := k.(type) {
		case string:
			v = v.(map[string]any)[k]
		case int:
			v = v.([]any)[k]
		}
	}
	return v
}

// tree0 returns tree 0 of a decoded gbtree model.
func tree0(m map[string]any) map[string]any {
	return jpath(m, "learner", "gradient_booster", "model", "trees", 0).(map[string]any)
}

func TestReadBadInput(t *testing.T) {
	binary := filepath.Join(modelsDir, "binary", "model.json")
	poisson := filepath.Join(fixtureDir, "poisson", "model.json")
	rawBinary, err := os.ReadFile(binary)
	if err != nil {
		t.Fatalf("reference fixture missing: %v", err)
	}
	rawDump, err := os.ReadFile(filepath.Join(modelsDir, "binary", "dump.txt"))
	if err != nil {
		t.Fatalf("reference fixture missing: %v", err)
	}
	set := func(field string, i int, v any) func(m map[string]any) {
		return func(m map[string]any) { tree0(m)[field].([]any)[i] = v }
	}
	dumpText := func(from, to string) []byte {
		if !bytes.Contains(rawDump, []byte(from)) {
			t.Fatalf("dump.txt does not contain %q", from)
		}
		return bytes.Replace(rawDump, []byte(from), []byte(to), 1)
	}
	// Each row: input, options, the *Error location expected (-1 = none)
	// and a fragment of the message. Rules are the package's contract
	// (common practice for readers of untrusted files).
	for _, c := range []struct {
		name       string
		data       []byte
		opts       Options
		tree, node int
		line       int
		msg        string
		is         error
	}{
		{"truncated json", rawBinary[:len(rawBinary)/2], Options{}, -1, -1, 1, "unexpected end of JSON input", nil},
		{"non-json", []byte("this is not a model\n"), Options{}, -1, -1, 0, "unknown model format", ErrUnknownFormat},
		{"json forced on text", []byte("booster[0]:\n0:leaf=1\n"), Options{Format: FormatXGBoostJSON}, -1, -1, 1, "invalid XGBoost JSON model", nil},
		{"unknown format option", rawBinary, Options{Format: "xgboost-binary"}, -1, -1, 0, `format "xgboost-binary"`, ErrUnknownFormat},
		{"no trees", mutateJSON(t, binary, func(m map[string]any) {
			mod := jpath(m, "learner", "gradient_booster", "model").(map[string]any)
			mod["trees"], mod["tree_info"] = []any{}, []any{}
		}), Options{}, -1, -1, 0, "no trees", forest.ErrInvalid},
		{"child out of range", mutateJSON(t, binary, set("left_children", 1, 99)), Options{}, 0, 1, 0, "child index 99 out of range (tree has 31 nodes)", nil},
		{"cycle", mutateJSON(t, binary, set("left_children", 2, 0)), Options{}, 0, 2, 0, "reached twice from the root (cycle or shared child)", forest.ErrInvalid},
		{"leaf with one child", mutateJSON(t, binary, set("right_children", 20, 3)), Options{}, 0, 20, 0, "left child -1 but right child 3", nil},
		{"depth over the limit", rawBinary, Options{MaxDepth: 2}, 0, -2, 0, "exceeds the limit 2", forest.ErrInvalid},
		{"NaN threshold", mutateJSON(t, binary, set("split_conditions", 0, "NaN")), Options{}, 0, 0, 0, "threshold NaN is not finite", forest.ErrInvalid},
		{"threshold beyond float32", mutateJSON(t, binary, set("split_conditions", 0, 1e300)), Options{}, 0, 0, 0, "outside float32 range", forest.ErrInvalid},
		{"NaN leaf", mutateJSON(t, binary, set("split_conditions", 20, "NaN")), Options{}, 0, 20, 0, "leaf value NaN", forest.ErrInvalid},
		{"feature beyond declared", mutateJSON(t, binary, set("split_indices", 0, 8)), Options{}, 0, 0, 0, "feature index 8 out of range (8 features declared)", forest.ErrInvalid},
		{"array length", mutateJSON(t, binary, func(m map[string]any) {
			tr := tree0(m)
			tr["default_left"] = tr["default_left"].([]any)[:3]
		}), Options{}, 0, -1, 0, "default_left has 3 entries for 31 nodes", nil},
		{"tree_info length", mutateJSON(t, binary, func(m map[string]any) {
			mod := jpath(m, "learner", "gradient_booster", "model").(map[string]any)
			mod["tree_info"] = []any{0}
		}), Options{}, -1, -1, 0, "tree_info has 1 entries for 20 trees", nil},
		{"class out of range", mutateJSON(t, binary, func(m map[string]any) {
			jpath(m, "learner", "gradient_booster", "model", "tree_info").([]any)[4] = 1
		}), Options{}, 4, -1, 0, "tree_info class 1 out of range [0, 1)", nil},
		{"unknown objective", mutateJSON(t, binary, func(m map[string]any) {
			jpath(m, "learner", "objective").(map[string]any)["name"] = "reg:mystery"
		}), Options{}, -1, -1, 0, `objective "reg:mystery"`, ErrUnsupported},
		{"base_score outside (0, 1)", mutateJSON(t, binary, func(m map[string]any) {
			jpath(m, "learner", "learner_model_param").(map[string]any)["base_score"] = "1.5E0"
		}), Options{}, -1, -1, 0, "base_score 1.5 outside (0, 1)", nil},
		{"gblinear", []byte(`{"learner":{"gradient_booster":{"name":"gblinear","model":{"weights":[1]}},"objective":{"name":"reg:squarederror"}}}`),
			Options{}, -1, -1, 0, "gblinear", ErrUnsupported},
		{"vector leaves", mutateJSON(t, binary, func(m map[string]any) {
			jpath(m, "learner", "gradient_booster", "model", "gbtree_model_param").(map[string]any)["size_leaf_vector"] = "2"
		}), Options{}, -1, -1, 0, "vector leaves", ErrUnsupported},
		{"names file too short", rawBinary, Options{FeatureNames: []string{"alpha", "beta"}}, -1, -1, 0, "2 names given, the model stores 8", ErrFeatureNames},
		{"names file disagrees", rawBinary, Options{FeatureNames: []string{"alpha", "beta", "gamma", "delta", "epsilon", "zeta", "theta", "eta"}},
			-1, -1, 0, `feature 6 is "eta" in the model, "theta" in the names given`, ErrFeatureNames},
		{"names for an unnamed model", mustRead(t, poisson), Options{FeatureNames: []string{"a", "b", "c"}}, -1, -1, 0, "3 names given for num_feature 8", ErrFeatureNames},
		{"bad gzip", append([]byte{0x1f, 0x8b}, rawBinary[:50]...), Options{}, -1, -1, 0, "gzip", nil},
		{"ubjson", []byte("{L\x00\x00\x00\x00\x00\x00\x00\x07learner{"), Options{}, -1, -1, 0, "UBJSON", ErrUnsupported},

		{"dump text: bad line", dumpText("\t1:[alpha<-0.20144", "\t1:(alpha<-0.20144"), Options{}, -1, -1, 3, `node 1: expected "[condition]"`, nil},
		{"dump text: child missing", dumpText("yes=1,no=2,missing=1", "yes=1,no=99,missing=1"), Options{}, 0, 0, 2, "child id 99 not in the tree", nil},
		{"dump text: missing neither child", dumpText("yes=1,no=2,missing=1", "yes=1,no=2,missing=5"), Options{}, 0, 0, 2, "missing=5 is neither yes=1 nor no=2", nil},
		{"dump text: cycle", dumpText("yes=1,no=2,missing=1", "yes=0,no=2,missing=0"), Options{}, 0, 0, 2, "reached twice", forest.ErrInvalid},
		{"dump text: infinite threshold", dumpText("[beta<0.5]", "[beta<inf]"), Options{}, 0, 0, 2, "threshold +Inf is not finite", forest.ErrInvalid},
		{"dump text: bad leaf", dumpText("leaf=0.444776148", "leaf=zero"), Options{}, -1, -1, 6, `leaf value: bad number "zero"`, nil},
		{"dump text: duplicate node", dumpText("\t1:[alpha", "\t2:[alpha"), Options{}, 0, 2, 0, "node id 2 appears twice", nil},
		{"dump text: header out of order", dumpText("booster[1]:", "booster[5]:"), Options{}, -1, -1, 0, "booster[5] where booster[1] was expected", nil},
		{"dump text: indicator split", dumpText("[beta<0.5]", "[beta]"), Options{}, -1, -1, 2, "indicator split", ErrUnsupported},
		{"dump text: names list too short", rawDump, Options{FeatureNames: []string{"alpha", "beta"}}, 0, 7, 5, `feature "gamma" is not among the 2 names given`, ErrFeatureNames},
		{"dump text: unknown objective", rawDump, Options{Objective: "binary:hinge"}, -1, -1, 0, `objective "binary:hinge"`, ErrUnsupported},
		{"dump text: multiclass without classes", rawDump, Options{Objective: "multi:softprob"}, -1, -1, 0, "needs NumClass >= 2", nil},
		{"dump text: trees not a multiple of classes", rawDump, Options{Objective: "multi:softprob", NumClass: 3}, -1, -1, 0, "20 trees is not a multiple of 3 classes", nil},
		{"dump text: no trees", []byte("booster[0]x\n"), Options{Format: FormatXGBoostDumpText}, -1, -1, 1, "bad tree header", nil},
		{"dump text: node before header", []byte("0:leaf=1\n"), Options{Format: FormatXGBoostDumpText}, -1, -1, 1, "before the first booster[0]", nil},
		{"dump text: depth over the limit", rawDump, Options{MaxDepth: 1}, 0, -2, 0, "exceeds the limit 1", forest.ErrInvalid},

		{"dump json: truncated", []byte("[\n{ \"nodeid\": 0, \"split\": \"a\""), Options{}, -1, -1, 2, "unexpected end of JSON input", nil},
		{"dump json: no nodeid", []byte(`[{"leaf": 1}]`), Options{}, 0, -1, 0, `node without "nodeid"`, nil},
		{"dump json: split without children ids", []byte(`[{"nodeid": 0, "split": "a", "split_condition": 1}]`), Options{}, 0, -1, 0, "split node needs", nil},
		{"dump json: empty list", []byte(`[]`), Options{}, -1, -1, 0, "no trees", nil},
		{"dump json: no root", []byte(`[{"nodeid": 3, "leaf": 1}]`), Options{}, 0, -1, 0, "no root node (id 0)", nil},
		{"dump json: negative category", []byte(`[{"nodeid":0,"split":"a","split_condition":[-1],"yes":1,"no":2,"missing":2,"children":[{"nodeid":1,"leaf":1},{"nodeid":2,"leaf":2}]}]`),
			Options{}, 0, 0, 0, "category -1 out of range", nil},
	} {
		t.Run(c.name, func(t *testing.T) {
			const name = "models/cand.model"
			e, err := Read(bytes.NewReader(c.data), name, c.opts)
			if err == nil {
				t.Fatalf("no error (%d trees), want %q", len(e.Trees), c.msg)
			}
			msg := err.Error()
			if !strings.HasPrefix(msg, name) || !strings.Contains(msg, c.msg) || strings.Contains(msg, "\n") {
				t.Fatalf("error %q: want one line starting with the file name and containing %q", msg, c.msg)
			}
			var fe *Error
			if !errors.As(err, &fe) {
				t.Fatalf("error %q is not an *Error", msg)
			}
			if fe.Tree != c.tree || (c.node != -2 && fe.Node != c.node) || (c.line != 0 && fe.Line != c.line) {
				t.Errorf("located at tree %d node %d line %d, want tree %d node %d line %d (%s)", fe.Tree, fe.Node, fe.Line, c.tree, c.node, c.line, msg)
			}
			if c.is != nil && !errors.Is(err, c.is) {
				t.Errorf("error %q does not wrap %v", msg, c.is)
			}
		})
	}
}

// mustRead reads a fixture file or fails the test.
func mustRead(t *testing.T, path string) []byte {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("reference fixture missing: %v", err)
	}
	return data
}

func TestQuoteNonFinite(t *testing.T) {
	// XGBoost's JSON writer spells non-finite floats NaN, Infinity and
	// -Infinity (the categorical fixture holds NaN split_conditions).
	for _, c := range []struct{ in, want string }{
		{`[1E0,NaN,-2E0]`, `[1E0,"NaN",-2E0]`},
		{`{"a":Infinity,"b":-Infinity}`, `{"a":"Infinity","b":"-Infinity"}`},
		{`{"NaN":"NaN is fine in strings \" NaN"}`, `{"NaN":"NaN is fine in strings \" NaN"}`},
		{`[null,true,false,-1]`, `[null,true,false,-1]`},
		{`[NaNo]`, `[NaNo]`},
	} {
		if got := string(quoteNonFinite([]byte(c.in))); got != c.want {
			t.Errorf("quoteNonFinite(%s) = %s, want %s", c.in, got, c.want)
		}
	}
	var f jsonFloats
	if err := json.Unmarshal(quoteNonFinite([]byte(`[NaN, Infinity, -Infinity, 2.5E-1, 1e999]`)), &f); err != nil {
		t.Fatal(err)
	}
	if !math.IsNaN(f[0]) || !math.IsInf(f[1], 1) || !math.IsInf(f[2], -1) || f[3] != 0.25 || !math.IsInf(f[4], 1) {
		t.Errorf("parsed %v", f)
	}
	var a jsonInts
	if err := json.Unmarshal([]byte(`[1, true, false, 3E0, -2]`), &a); err != nil || !reflect.DeepEqual([]int64(a), []int64{1, 1, 0, 3, -2}) {
		t.Errorf("ints %v, %v", a, err)
	}
	if err := json.Unmarshal([]byte(`[1.5]`), &a); err == nil {
		t.Errorf("1.5 accepted as an integer")
	}
}

// checkReadResult is the fuzz invariant: no panic, and anything returned
// without error validates, summarises and scores.
func checkReadResult(t *testing.T, e *forest.Ensemble, err error) {
	if err != nil {
		if strings.Contains(err.Error(), "\n") {
			t.Fatalf("multi-line error %q", err)
		}
		var fe *Error
		if !errors.As(err, &fe) {
			t.Fatalf("error %q is not an *Error", err)
		}
		return
	}
	if verr := e.Validate(0); verr != nil {
		t.Fatalf("returned ensemble does not validate: %v", verr)
	}
	forest.Summarize(e)
	const rows = 9
	row := []float64{math.NaN(), -1, 0, 0.5, 1, 2, 3, 1e9, -1e9}
	cols := make([][]float64, e.NumFeatures())
	for j := range cols {
		cols[j] = row
	}
	dst := make([]float64, rows*e.NumClass)
	e.Margins(dst, cols, rows, 1)
}

// addFixtureSeeds adds every fixture file with one of the names as a seed.
func addFixtureSeeds(f *testing.F, names ...string) {
	for _, dir := range []string{modelsDir, fixtureDir} {
		for _, nm := range names {
			paths, _ := filepath.Glob(filepath.Join(dir, "*", nm))
			for _, p := range paths {
				data, err := os.ReadFile(p)
				if err != nil {
					f.Fatal(err)
				}
				f.Add(data)
			}
		}
	}
}

func FuzzReadXGBoostJSON(f *testing.F) {
	addFixtureSeeds(f, "model.json")
	f.Add([]byte(`{"learner":{"gradient_booster":{"name":"gbtree","model":{"trees":[{"left_children":[-1],"right_children":[-1],"split_indices":[0],"split_conditions":[1],"default_left":[0]}],"tree_info":[0]}},"objective":{"name":"reg:squarederror"},"learner_model_param":{"base_score":"5E-1","num_feature":"1"}}}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		e, err := Read(bytes.NewReader(data), "fuzz.json", Options{Format: FormatXGBoostJSON})
		checkReadResult(t, e, err)
	})
}

func FuzzReadXGBoostDumpJSON(f *testing.F) {
	addFixtureSeeds(f, "dump.json")
	f.Add([]byte(`[{"nodeid":0,"split":"f1","split_condition":[1,3],"yes":2,"no":1,"missing":1,"children":[{"nodeid":1,"leaf":0.5},{"nodeid":2,"leaf":-0.5}]}]`))
	f.Fuzz(func(t *testing.T, data []byte) {
		e, err := Read(bytes.NewReader(data), "fuzz.json", Options{Format: FormatXGBoostDumpJSON})
		checkReadResult(t, e, err)
	})
}

func FuzzReadXGBoostDumpText(f *testing.F) {
	addFixtureSeeds(f, "dump.txt")
	f.Add([]byte("booster[0]:\n0:[f0<0.5] yes=1,no=2,missing=1\n\t1:leaf=1\n\t2:leaf=-1\n"))
	f.Add([]byte("booster[0]:\n0:[c:{0,2}] yes=2,no=1,missing=1\n\t1:leaf=1\n\t2:leaf=-1\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		e, err := Read(bytes.NewReader(data), "fuzz.txt", Options{Format: FormatXGBoostDumpText})
		checkReadResult(t, e, err)
	})
}
