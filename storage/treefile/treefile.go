// Package treefile reads trained tree-ensemble model files into the compiled
// ensemble of package forest: XGBoost's JSON model (save_model), XGBoost's
// JSON and text dumps with statistics (get_dump / dump_model), and LightGBM's
// text model. Each reader parses, then validates once (indexes, cycles,
// depth, counts) and indexes the trees by feature. Model files are untrusted
// input: bad content returns an *Error naming the file and the tree, node or
// line, never a panic.
package treefile

import (
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"splitledger/importance/forest"
)

// Format names a model file format.
type Format string

// Known formats.
const (
	// FormatXGBoostJSON is XGBoost's JSON model written by save_model
	// (versions 1.6 to 2.x).
	FormatXGBoostJSON Format = "xgboost-json"
	// FormatXGBoostDumpJSON is get_dump(dump_format="json") written as one
	// JSON list of nested tree objects.
	FormatXGBoostDumpJSON Format = "xgboost-dump-json"
	// FormatXGBoostDumpText is the text dump: "booster[N]:" blocks of
	// "id:[feature<threshold] yes=..,no=..,missing=.." and "id:leaf=.." lines.
	FormatXGBoostDumpText Format = "xgboost-dump-text"
	// FormatLightGBMText is LightGBM's text model written by save_model.
	FormatLightGBMText Format = "lightgbm-text"
)

// DefaultMaxDepth is the depth limit used when Options.MaxDepth is 0.
const DefaultMaxDepth = forest.DefaultMaxDepth

// MaxFeatures bounds the number of features a model file may declare
// (num_feature, or the highest fN index a dump uses). It keeps the cost of
// reading proportional to the file: a few bytes must not declare millions of
// features. The traffic frame holds one column per feature, so models beyond
// this are out of reach anyway.
const MaxFeatures = 1 << 20

// DefaultDumpObjective is the objective assumed for a dump when
// Options.Objective is empty; it is XGBoost's own default objective.
const DefaultDumpObjective = "reg:squarederror"

// DefaultDumpBaseScore is the base score assumed for a dump when
// Options.BaseScore is nil: XGBoost 1.7's default base_score.
const DefaultDumpBaseScore = 0.5

// Options control how a model file is read. The zero value sniffs the
// format and uses the defaults documented on each field.
type Options struct {
	// Format forces a format; "" sniffs it from the content.
	Format Format
	// FeatureNames gives the declared features in model order. Dumps that
	// split on f0, f1, ... take their names from it (it must cover every
	// index used); dumps that split on names look each name up in it (a
	// name absent from it is an error). A JSON model without stored names
	// takes them from it (its length must equal num_feature); a JSON model
	// with stored names must agree with it. nil: names from the file, or
	// f0..f{n-1}.
	FeatureNames []string
	// BaseScore is XGBoost's base_score parameter for dumps, on the
	// prediction scale (a probability for logistic objectives). nil means
	// DefaultDumpBaseScore. Ignored for JSON models, which store it.
	BaseScore *float64
	// Objective is the XGBoost objective string for dumps (they do not
	// record it); "" means DefaultDumpObjective. Ignored for JSON models.
	Objective string
	// NumClass is the number of classes of a multi-class dump; tree i adds
	// to class i % NumClass, as XGBoost assigns trees round-robin when
	// num_parallel_tree is 1. 0 means 1 unless the objective is multi:*,
	// where it is required. Ignored for JSON models.
	NumClass int
	// MaxDepth bounds the depth of every tree (root at depth 0); 0 means
	// DefaultMaxDepth.
	MaxDepth int
}

// maxDepth returns the effective depth limit.
func (o *Options) maxDepth() int {
	if o.MaxDepth <= 0 {
		return DefaultMaxDepth
	}
	return o.MaxDepth
}

// Error is a model-file error with its location. Tree and Node are -1 when
// unknown, Line is 0 when unknown. The message is one line, e.g.
// "models/cand.json: tree 12 node 7: child index 99 out of range (tree has
// 31 nodes)" or "dump.txt:118: bad leaf value".
type Error struct {
	// File is the name given to Read (a path for ReadFile).
	File string
	// Tree and Node locate the problem in the ensemble (-1: not known).
	Tree, Node int
	// Line is the 1-based line in a text file (0: not known).
	Line int
	// Err is the underlying problem.
	Err error
}

// Error formats the location and the cause on one line.
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		b.WriteByte(':')
		b.WriteString(strconv.Itoa(e.Line))
	}
	if e.Tree >= 0 {
		b.WriteString(": tree ")
		b.WriteString(strconv.Itoa(e.Tree))
		if e.Node >= 0 {
			b.WriteString(" node ")
			b.WriteString(strconv.Itoa(e.Node))
		}
	}
	b.WriteString(": ")
	if e.Err != nil {
		b.WriteString(oneLine(e.Err.Error()))
	} else {
		b.WriteString("invalid model")
	}
	return b.String()
}

// Unwrap returns the underlying problem.
func (e *Error) Unwrap() error { return e.Err }

// oneLine replaces line breaks so an error message stays on one line.
func oneLine(s string) string {
	if !strings.ContainsAny(s, "\r\n") {
		return s
	}
	return strings.NewReplacer("\r\n", " ", "\n", " ", "\r", " ").Replace(s)
}

// Sentinel causes, matched with errors.Is.
var (
	// ErrUnknownFormat: the content is not a model format this package reads.
	ErrUnknownFormat = errors.New("unknown model format")
	// ErrUnsupported: a recognised format or model feature that is not
	// supported (UBJSON, gblinear, vector leaves, unknown objective, ...).
	ErrUnsupported = errors.New("unsupported model")
	// ErrFeatureNames: feature names disagree with the model.
	ErrFeatureNames = errors.New("feature names do not match the model")
)

// fileErr builds an *Error without a tree location.
func fileErr(name string, line int, err error) *Error {
	return &Error{File: name, Tree: -1, Node: -1, Line: line, Err: err}
}

// nodeErr builds an *Error at a tree and node (node -1: the whole tree).
func nodeErr(name string, tree, node int, err error) *Error {
	return &Error{File: name, Tree: tree, Node: node, Err: err}
}

// gzipMagic starts every gzip stream.
var gzipMagic = []byte{0x1f, 0x8b}

// maxModelBytes bounds the decompressed size of a model file (4 GiB).
const maxModelBytes = 4 << 30

// Read parses one model file from r. name labels every error message (a
// path or any description). Content starting with the gzip magic bytes is
// decompressed first. The format comes from opts.Format or, when empty,
// from Sniff. The returned ensemble is validated (forest.Ensemble.Validate
// with opts.MaxDepth) and indexed by feature.
func Read(r io.Reader, name string, opts Options) (*forest.Ensemble, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, fileErr(name, 0, fmt.Errorf("read: %w", err))
	}
	return readBytes(data, name, opts)
}

// ReadFile opens path and calls Read with path as the name.
func ReadFile(path string, opts Options) (*forest.Ensemble, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fileErr(path, 0, err)
	}
	defer f.Close()
	return Read(f, path, opts)
}

// readBytes is Read on an in-memory file.
func readBytes(data []byte, name string, opts Options) (*forest.Ensemble, error) {
	if bytes.HasPrefix(data, gzipMagic) {
		zr, err := gzip.NewReader(bytes.NewReader(data))
		if err != nil {
			return nil, fileErr(name, 0, fmt.Errorf("gzip: %w", err))
		}
		plain, err := io.ReadAll(io.LimitReader(zr, maxModelBytes+1))
		if err != nil {
			return nil, fileErr(name, 0, fmt.Errorf("gzip: %w", err))
		}
		if len(plain) > maxModelBytes {
			return nil, fileErr(name, 0, fmt.Errorf("gzip: decompressed model larger than %d bytes", maxModelBytes))
		}
		data = plain
	}
	format := opts.Format
	if format == "" {
		f, err := Sniff(data)
		if err != nil {
			return nil, fileErr(name, 0, err)
		}
		format = f
	}
	switch format {
	case FormatXGBoostJSON:
		return readXGBoostJSON(data, name, opts)
	case FormatXGBoostDumpJSON:
		return readXGBoostDumpJSON(data, name, opts)
	case FormatXGBoostDumpText:
		return readXGBoostDumpText(data, name, opts)
	case FormatLightGBMText:
		return readLightGBMText(data, name, opts)
	default:
		return nil, fileErr(name, 0, fmt.Errorf("%w: format %q", ErrUnknownFormat, string(format)))
	}
}

// finish validates and indexes a freshly built ensemble, turning a
// *forest.NodeError into an *Error that names the file. lines, when not nil,
// maps tree and node to the source line for text formats.
func finish(e *forest.Ensemble, name string, opts Options, lines [][]int) (*forest.Ensemble, error) {
	if err := e.Validate(opts.maxDepth()); err != nil {
		var ne *forest.NodeError
		if errors.As(err, &ne) {
			out := nodeErr(name, ne.Tree, ne.Node, ne.Err)
			if lines != nil && ne.Tree >= 0 && ne.Tree < len(lines) && ne.Node >= 0 && ne.Node < len(lines[ne.Tree]) {
				out.Line = lines[ne.Tree][ne.Node]
			}
			return nil, out
		}
		return nil, fileErr(name, 0, err)
	}
	e.Index()
	return e, nil
}
