package audit

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// catalogSeed is the invented example catalog beside the reference values.
var catalogSeed = filepath.Join("..", "testdata", "reference", "audit", "catalog.csv")

func TestReadCatalog(t *testing.T) {
	c, err := ReadCatalog(catalogSeed)
	if err != nil {
		t.Fatal(err)
	}
	if c.Path != catalogSeed || c.Unit != "USD" {
		t.Errorf("path %q unit %q", c.Path, c.Unit)
	}
	// Values as written in catalog.csv (line numbers count the header as 1).
	want := []Cost{
		{Feature: "review_score_mean", CostPer1kRows: 0.02, Unit: "USD", Group: "", Line: 2},
		{Feature: "image_quality_score", CostPer1kRows: 1.80, Unit: "USD", Group: "vision", Line: 3},
		{Feature: "image_brightness", CostPer1kRows: 0.40, Unit: "USD", Group: "vision", Line: 4},
		{Feature: "traveller_host_affinity", CostPer1kRows: 0.90, Unit: "USD", Group: "affinity", Line: 5},
		{Feature: "host_response_minutes", CostPer1kRows: 0, Unit: "USD", Group: "", Line: 6},
	}
	if len(c.Costs) != len(want) {
		t.Errorf("%d costs, want %d", len(c.Costs), len(want))
	}
	for _, w := range want {
		t.Run(w.Feature, func(t *testing.T) {
			if got := c.Costs[w.Feature]; got != w {
				t.Errorf("got %+v, want %+v", got, w)
			}
		})
	}
}

func TestParseCatalogForms(t *testing.T) {
	cases := []struct {
		name, text string
		want       map[string]Cost
	}{
		{
			name: "header without a group column, columns reordered, spaces and a BOM",
			text: "\ufeffUnit, Feature ,COST_PER_1K_ROWS\nms, text_match , 0.5\nms,photo_count,1e-3\n",
			want: map[string]Cost{
				"text_match":  {Feature: "text_match", CostPer1kRows: 0.5, Unit: "ms", Line: 2},
				"photo_count": {Feature: "photo_count", CostPer1kRows: 0.001, Unit: "ms", Line: 3},
			},
		},
		{
			name: "short rows read missing trailing fields as empty",
			text: "feature,cost_per_1k_rows,unit,group\nphoto_count,2,ms\n",
			want: map[string]Cost{"photo_count": {Feature: "photo_count", CostPer1kRows: 2, Unit: "ms", Line: 2}},
		},
		{
			name: "quoted field with a comma",
			text: "feature,cost_per_1k_rows,unit,group\n\"distance, km\",0.1,ms,\"geo, lookup\"\n",
			want: map[string]Cost{"distance, km": {Feature: "distance, km", CostPer1kRows: 0.1, Unit: "ms", Group: "geo, lookup", Line: 2}},
		},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c, err := parseCatalog(strings.NewReader(tc.text), "costs.csv")
			if err != nil {
				t.Fatal(err)
			}
			if len(c.Costs) != len(tc.want) {
				t.Fatalf("costs %+v, want %+v", c.Costs, tc.want)
			}
			for k, w := range tc.want {
				if got := c.Costs[k]; got != w {
					t.Errorf("%s: got %+v, want %+v", k, got, w)
				}
			}
		})
	}
}

func TestParseCatalogErrors(t *testing.T) {
	const head = "feature,cost_per_1k_rows,unit,group\n"
	cases := []struct {
		name, text string
		// want is the location the error must name ("file:line" or the
		// file alone) and then a phrase of the message.
		where, want string
	}{
		{"empty file", "", "costs.csv", "empty file"},
		{"header only", head, "costs.csv", "no feature lines"},
		{"missing unit column", "feature,cost_per_1k_rows\nphoto_count,1\n", "costs.csv:1", `"unit"`},
		{"missing cost column", "feature,unit\nphoto_count,ms\n", "costs.csv:1", `"cost_per_1k_rows"`},
		{"negative cost", head + "text_match,0.1,ms,\nphoto_count,-0.5,ms,\n", "costs.csv:3", `"-0.5"`},
		{"non-numeric cost", head + "photo_count,cheap,ms,\n", "costs.csv:2", `"cheap"`},
		{"empty cost", head + "photo_count,,ms,\n", "costs.csv:2", "cost_per_1k_rows"},
		{"NaN cost", head + "photo_count,NaN,ms,\n", "costs.csv:2", `"NaN"`},
		{"infinite cost", head + "photo_count,+Inf,ms,\n", "costs.csv:2", `"+Inf"`},
		{"duplicate feature", head + "photo_count,1,ms,\ntext_match,1,ms,\nphoto_count,2,ms,\n", "costs.csv:4", "line 2"},
		{"mixed units", head + "photo_count,1,ms,\ntext_match,1,USD,\n", "costs.csv:3", `"USD"`},
		{"empty feature name", head + ",1,ms,\n", "costs.csv:2", "empty feature"},
		{"empty unit", head + "photo_count,1,,\n", "costs.csv:2", "empty unit"},
		{"broken quoting", head + "\"photo_count,1,ms,\n", "costs.csv:", "quote"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := parseCatalog(strings.NewReader(tc.text), "costs.csv")
			if err == nil {
				t.Fatal("parseCatalog accepted the file")
			}
			msg := err.Error()
			if !strings.Contains(msg, "cost catalog "+tc.where) || !strings.Contains(msg, tc.want) {
				t.Errorf("error %q should name %q and mention %q", msg, tc.where, tc.want)
			}
		})
	}
	t.Run("ReadCatalog names the file", func(t *testing.T) {
		p := filepath.Join(t.TempDir(), "costs.csv")
		if err := os.WriteFile(p, []byte(head+"photo_count,-1,ms,\n"), 0o644); err != nil {
			t.Fatal(err)
		}
		_, err := ReadCatalog(p)
		if err == nil || !strings.Contains(err.Error(), p+":2") {
			t.Errorf("ReadCatalog = %v, want an error naming %s:2", err, p)
		}
	})
	t.Run("ReadCatalog missing file", func(t *testing.T) {
		p := filepath.Join(t.TempDir(), "absent.csv")
		_, err := ReadCatalog(p)
		if err == nil || !strings.Contains(err.Error(), p) {
			t.Errorf("ReadCatalog = %v, want an error naming %s", err, p)
		}
	})
}

func FuzzParseCatalog(f *testing.F) {
	seed, err := os.ReadFile(catalogSeed)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(seed)
	f.Add([]byte("feature,cost_per_1k_rows,unit\nphoto_count,1,ms\n"))
	f.Add([]byte("feature,cost_per_1k_rows,unit,group\n\"a,b\",0,ms,g\nc,1e308,ms,g\n"))
	f.Add([]byte(""))
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := parseCatalog(bytes.NewReader(data), "fuzz.csv")
		if err != nil {
			if !strings.Contains(err.Error(), "cost catalog fuzz.csv") {
				t.Errorf("error %q does not name the file", err)
			}
			return
		}
		// An accepted catalog holds at least one feature, one unit, and
		// finite non-negative costs (ReadCatalog doc comment).
		if len(c.Costs) == 0 || c.Unit == "" {
			t.Fatalf("accepted an empty catalog: %+v", c)
		}
		for name, cost := range c.Costs {
			if name == "" || name != cost.Feature || cost.Unit != c.Unit || cost.Line < 2 {
				t.Errorf("inconsistent entry %q: %+v (unit %q)", name, cost, c.Unit)
			}
			if !(cost.CostPer1kRows >= 0) || math.IsInf(cost.CostPer1kRows, 0) {
				t.Errorf("%q: cost %v", name, cost.CostPer1kRows)
			}
		}
	})
}
