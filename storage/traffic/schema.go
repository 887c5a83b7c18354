package traffic

import (
	"fmt"
	"sort"
	"strings"

	"github.com/parquet-go/parquet-go/deprecated"
	"github.com/parquet-go/parquet-go/format"
)

// kind is how the reader turns a column's stored values into numbers.
type kind uint8

const (
	kindUnsupported kind = iota
	kindDouble
	kindFloat
	kindInt32  // INT32, plain or INT(8|16|32, signed)
	kindUint32 // INT32 with INT(8|16|32, unsigned)
	kindInt64
	kindUint64
	kindBoolean
	kindString // BYTE_ARRAY: STRING, ENUM or no annotation
)

func (k kind) String() string {
	switch k {
	case kindDouble:
		return "DOUBLE"
	case kindFloat:
		return "FLOAT"
	case kindInt32:
		return "INT32"
	case kindUint32:
		return "INT32 (unsigned)"
	case kindInt64:
		return "INT64"
	case kindUint64:
		return "INT64 (unsigned)"
	case kindBoolean:
		return "BOOLEAN"
	case kindString:
		return "BYTE_ARRAY (strings)"
	default:
		return "unsupported"
	}
}

func (k kind) numeric() bool { return k != kindUnsupported && k != kindString }

func (k kind) integer() bool {
	return k == kindInt32 || k == kindUint32 || k == kindInt64 || k == kindUint64
}

// schemaColumn is one top-level field of a file.
type schemaColumn struct {
	name     string
	leaf     int // index of its column chunk in every row group
	kind     kind
	physical format.Type
	problem  string // why the column is unsupported, "" when it is fine
}

// readSchema lists the top-level fields of a flattened Parquet schema (depth
// first, as the footer stores it). Nested fields count their leaves so that
// the leaf index of every top-level leaf is its column chunk index.
func readSchema(elems []format.SchemaElement) (map[string]schemaColumn, []string, int, error) {
	if len(elems) == 0 {
		return nil, nil, 0, fmt.Errorf("%w: empty schema", ErrDamaged)
	}
	root := elems[0]
	children := int(root.NumChildren.V)
	if children < 0 || children > len(elems)-1 {
		return nil, nil, 0, fmt.Errorf("%w: schema root claims %d children", ErrDamaged, children)
	}
	cols := make(map[string]schemaColumn, children)
	var order []string
	next, leaves := 1, 0
	for c := 0; c < children; c++ {
		if next >= len(elems) {
			return nil, nil, 0, fmt.Errorf("%w: schema ends inside field %d", ErrDamaged, c)
		}
		e := &elems[next]
		col := schemaColumn{name: e.Name, leaf: leaves}
		end, n, err := skipSubtree(elems, next)
		if err != nil {
			return nil, nil, 0, err
		}
		if e.NumChildren.Valid && e.NumChildren.V > 0 || !e.Type.Valid {
			col.problem = "nested field (list, map or struct)"
			col.leaf = -1
		} else {
			col.kind, col.problem = classify(e)
			col.physical = e.Type.V
		}
		if _, dup := cols[col.name]; dup {
			col.problem = "column name appears twice in the schema"
		}
		cols[col.name] = col
		order = append(order, col.name)
		next, leaves = end, leaves+n
	}
	if next != len(elems) {
		return nil, nil, 0, fmt.Errorf("%w: schema has %d elements, fields use %d", ErrDamaged, len(elems), next)
	}
	return cols, order, leaves, nil
}

// skipSubtree returns the index after the subtree starting at i and its
// number of leaves.
func skipSubtree(elems []format.SchemaElement, i int) (end, leaves int, err error) {
	pending := 1
	for pending > 0 {
		if i >= len(elems) {
			return 0, 0, fmt.Errorf("%w: schema ends inside a nested field", ErrDamaged)
		}
		e := &elems[i]
		pending--
		if e.NumChildren.Valid && e.NumChildren.V > 0 {
			if int(e.NumChildren.V) > len(elems) {
				return 0, 0, fmt.Errorf("%w: field %q claims %d children", ErrDamaged, e.Name, e.NumChildren.V)
			}
			pending += int(e.NumChildren.V)
		} else {
			leaves++
		}
		i++
	}
	return i, leaves, nil
}

// classify maps a leaf schema element to a kind, or explains why it is not
// supported.
func classify(e *format.SchemaElement) (kind, string) {
	if e.RepetitionType.Valid && e.RepetitionType.V == format.Repeated {
		return kindUnsupported, "repeated field"
	}
	phys := e.Type.V
	switch lt := e.LogicalType.Value.(type) {
	case nil:
	case *format.IntType:
		return intKind(phys, int(lt.BitWidth), lt.IsSigned)
	case *format.StringType, *format.EnumType:
		if phys == format.ByteArray {
			return kindString, ""
		}
		return kindUnsupported, fmt.Sprintf("%s on %s", lt.String(), phys)
	default:
		return kindUnsupported, fmt.Sprintf("%s %s", phys, lt.String())
	}
	if e.ConvertedType.Valid {
		switch ct := e.ConvertedType.V; ct {
		case deprecated.Int8:
			return intKind(phys, 8, true)
		case deprecated.Int16:
			return intKind(phys, 16, true)
		case deprecated.Int32:
			return intKind(phys, 32, true)
		case deprecated.Int64:
			return intKind(phys, 64, true)
		case deprecated.Uint8:
			return intKind(phys, 8, false)
		case deprecated.Uint16:
			return intKind(phys, 16, false)
		case deprecated.Uint32:
			return intKind(phys, 32, false)
		case deprecated.Uint64:
			return intKind(phys, 64, false)
		case deprecated.UTF8, deprecated.Enum:
			if phys == format.ByteArray {
				return kindString, ""
			}
			return kindUnsupported, fmt.Sprintf("string annotation on %s", phys)
		default:
			return kindUnsupported, fmt.Sprintf("%s with converted type %d", phys, int(ct))
		}
	}
	switch phys {
	case format.Double:
		return kindDouble, ""
	case format.Float:
		return kindFloat, ""
	case format.Int32:
		return kindInt32, ""
	case format.Int64:
		return kindInt64, ""
	case format.Boolean:
		return kindBoolean, ""
	case format.ByteArray:
		return kindString, ""
	default:
		return kindUnsupported, phys.String()
	}
}

func intKind(phys format.Type, bits int, signed bool) (kind, string) {
	switch {
	case phys == format.Int32 && (bits == 8 || bits == 16 || bits == 32):
		if signed {
			return kindInt32, ""
		}
		return kindUint32, ""
	case phys == format.Int64 && bits == 64:
		if signed {
			return kindInt64, ""
		}
		return kindUint64, ""
	}
	return kindUnsupported, fmt.Sprintf("INT(%d) on %s", bits, phys)
}

// role is what a column becomes in the frame.
type role uint8

const (
	roleFeature role = iota
	roleLabel
	roleWeight
	roleGroup
)

// target is one column the frame needs.
type target struct {
	role       role
	feature    int    // index in Options.Features for roleFeature
	name       string // model feature name, or "label", "weight", "group"
	column     string // traffic column name
	categories map[string]int
}

func (t *target) describe() string {
	if t.role == roleFeature && t.name != t.column {
		return fmt.Sprintf("column %q (model feature %q)", t.column, t.name)
	}
	if t.role != roleFeature {
		return fmt.Sprintf("%s column %q", t.name, t.column)
	}
	return fmt.Sprintf("column %q", t.column)
}

func makeTargets(opts Options) []target {
	targets := make([]target, 0, len(opts.Features)+3)
	for j, name := range opts.Features {
		col := name
		if r, ok := opts.Rename[name]; ok {
			col = r
		}
		targets = append(targets, target{role: roleFeature, feature: j, name: name, column: col, categories: opts.Categories[name]})
	}
	if opts.Label != "" {
		targets = append(targets, target{role: roleLabel, name: "label", column: opts.Label})
	}
	if opts.Weight != "" {
		targets = append(targets, target{role: roleWeight, name: "weight", column: opts.Weight})
	}
	if opts.Group != "" {
		targets = append(targets, target{role: roleGroup, name: "group", column: opts.Group})
	}
	return targets
}

// accepts reports whether a column of kind k can fill target t, with the
// reason when it cannot.
func (t *target) accepts(k kind) string {
	switch t.role {
	case roleGroup:
		if k.integer() || k == kindString {
			return ""
		}
		return fmt.Sprintf("%s cannot hold query ids (want INT32, INT64 or strings)", k)
	case roleFeature:
		if k == kindString && t.categories == nil {
			return "strings for a feature with no category dictionary"
		}
		return ""
	default:
		if k == kindString {
			return fmt.Sprintf("strings cannot be a %s", t.name)
		}
		return ""
	}
}

// missingColumnsError lists every needed column that is not in the file,
// each with the closest column names by edit distance.
func missingColumnsError(path string, missing []*target, order []string) error {
	var b strings.Builder
	features := 0
	for _, t := range missing {
		if t.role == roleFeature {
			features++
		}
	}
	fmt.Fprintf(&b, "traffic: %s: %d needed column(s) not in the traffic (%d model feature(s)): ", path, len(missing), features)
	for i, t := range missing {
		if i > 0 {
			b.WriteString("; ")
		}
		if t.role == roleFeature && t.name != t.column {
			fmt.Fprintf(&b, "%q (model feature %q)", t.column, t.name)
		} else if t.role == roleFeature {
			fmt.Fprintf(&b, "%q", t.column)
		} else {
			fmt.Fprintf(&b, "%s %q", t.name, t.column)
		}
		if near := closestNames(t.column, order, 3); len(near) > 0 {
			fmt.Fprintf(&b, " (closest: %s)", quoteJoin(near))
		}
	}
	return fmt.Errorf("%s: %w", b.String(), ErrMissingColumn)
}

func quoteJoin(names []string) string {
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = fmt.Sprintf("%q", n)
	}
	return strings.Join(q, ", ")
}

// closestNames returns the names within a small edit distance of name
// (at most max(2, runes/3); common practice), closest first, ties in the
// order of names, at most k of them. When none is that close it returns the
// single closest name.
func closestNames(name string, names []string, k int) []string {
	type scored struct {
		name string
		dist int
		pos  int
	}
	s := make([]scored, len(names))
	for i, n := range names {
		s[i] = scored{n, editDistance(name, n), i}
	}
	sort.Slice(s, func(a, b int) bool {
		if s[a].dist != s[b].dist {
			return s[a].dist < s[b].dist
		}
		return s[a].pos < s[b].pos
	})
	limit := max(2, len([]rune(name))/3)
	out := make([]string, 0, k)
	for i := 0; i < len(s) && len(out) < k; i++ {
		if s[i].dist <= limit || i == 0 {
			out = append(out, s[i].name)
		}
	}
	return out
}

// editDistance is the Levenshtein distance between a and b in runes
// (insertions, deletions and substitutions each cost 1; Levenshtein 1966).
func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	prev := make([]int, len(rb)+1)
	cur := make([]int, len(rb)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(ra); i++ {
		cur[0] = i
		for j := 1; j <= len(rb); j++ {
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(rb)]
}
