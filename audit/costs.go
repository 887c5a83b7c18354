package audit

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
)

// Cost is one catalog line: what computing a feature online costs.
type Cost struct {
	Feature       string
	CostPer1kRows float64
	Unit          string
	// Group names features computed together ("" = on its own): the
	// group's cost is the sum of its members' costs and is saved only when
	// every member is dropped.
	Group string
	Line  int
}

// Catalog is a cost catalog read from CSV.
type Catalog struct {
	Path  string
	Costs map[string]Cost
	Unit  string
}

// ReadCatalog reads a CSV with header feature,cost_per_1k_rows,unit[,group].
// Errors name the file and line: missing header columns, a non-numeric or
// negative cost, a feature listed twice, mixed units.
func ReadCatalog(path string) (*Catalog, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("cost catalog %s: %w", path, err)
	}
	defer f.Close()
	return parseCatalog(f, path)
}

func parseCatalog(r io.Reader, path string) (*Catalog, error) {
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = -1
	cr.TrimLeadingSpace = true
	head, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("cost catalog %s: empty file", path)
	}
	if err != nil {
		return nil, fmt.Errorf("cost catalog %s: %w", path, err)
	}
	col := map[string]int{}
	for i, h := range head {
		col[strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))] = i
	}
	for _, need := range []string{"feature", "cost_per_1k_rows", "unit"} {
		if _, ok := col[need]; !ok {
			return nil, fmt.Errorf("cost catalog %s:1: header lacks column %q (want feature,cost_per_1k_rows,unit[,group])", path, need)
		}
	}
	gi, hasGroup := col["group"]
	c := &Catalog{Path: path, Costs: map[string]Cost{}}
	line := 1
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		line++
		if err != nil {
			return nil, fmt.Errorf("cost catalog %s:%d: %w", path, line, err)
		}
		get := func(i int) string {
			if i < len(rec) {
				return strings.TrimSpace(rec[i])
			}
			return ""
		}
		name := get(col["feature"])
		if name == "" {
			return nil, fmt.Errorf("cost catalog %s:%d: empty feature name", path, line)
		}
		v, err := strconv.ParseFloat(get(col["cost_per_1k_rows"]), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
			return nil, fmt.Errorf("cost catalog %s:%d: cost_per_1k_rows %q is not a non-negative number", path, line, get(col["cost_per_1k_rows"]))
		}
		unit := get(col["unit"])
		if unit == "" {
			return nil, fmt.Errorf("cost catalog %s:%d: empty unit", path, line)
		}
		if c.Unit == "" {
			c.Unit = unit
		} else if unit != c.Unit {
			return nil, fmt.Errorf("cost catalog %s:%d: unit %q differs from %q on earlier lines (one unit per file)", path, line, unit, c.Unit)
		}
		if prev, dup := c.Costs[name]; dup {
			return nil, fmt.Errorf("cost catalog %s:%d: feature %q already listed on line %d", path, line, name, prev.Line)
		}
		cost := Cost{Feature: name, CostPer1kRows: v, Unit: unit, Line: line}
		if hasGroup {
			cost.Group = get(gi)
		}
		c.Costs[name] = cost
	}
	if len(c.Costs) == 0 {
		return nil, fmt.Errorf("cost catalog %s: no feature lines", path)
	}
	return c, nil
}
