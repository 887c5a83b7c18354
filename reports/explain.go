package reports

import (
	"fmt"
	"io"
	"math"
	"sort"
)

// ExplainedFeature is one feature's part in the score difference of two
// rows: its values and SHAP values in each row.
type ExplainedFeature struct {
	Feature        string
	ValueI, ValueJ float64
	SHAPI, SHAPJ   float64
	// Difference is SHAPI − SHAPJ; the differences add up to MarginI −
	// MarginJ (the bias cancels).
	Difference float64
}

// Explanation is the result of the explain command.
type Explanation struct {
	Model            string
	RowI, RowJ       int
	Class            int
	MarginI, MarginJ float64
	Features         []ExplainedFeature
}

// Sort orders features by |Difference|, largest first, ties by name.
func (x *Explanation) Sort() {
	sort.SliceStable(x.Features, func(a, b int) bool {
		da, db := math.Abs(x.Features[a].Difference), math.Abs(x.Features[b].Difference)
		if da != db {
			return da > db
		}
		return x.Features[a].Feature < x.Features[b].Feature
	})
}

// ExplainText writes the explanation as a table.
func ExplainText(w io.Writer, x *Explanation) error {
	fmt.Fprintf(w, "model %s, class %d\n", x.Model, x.Class)
	fmt.Fprintf(w, "row %d raw score %s, row %d raw score %s: difference %s\n",
		x.RowI, fmtNum(x.MarginI), x.RowJ, fmtNum(x.MarginJ), fmtNum(x.MarginI-x.MarginJ))
	tb := newTable(w, false, []string{"feature", fmt.Sprintf("row %d", x.RowI), fmt.Sprintf("row %d", x.RowJ), "SHAP difference", "pushes"})
	for _, f := range x.Features {
		dir := ""
		switch {
		case f.Difference > 0:
			dir = fmt.Sprintf("row %d up", x.RowI)
		case f.Difference < 0:
			dir = fmt.Sprintf("row %d down", x.RowI)
		}
		if err := tb.Append([]string{f.Feature, fmtNum(f.ValueI), fmtNum(f.ValueJ), fmtNum(f.Difference), dir}); err != nil {
			return err
		}
	}
	if err := tb.Render(); err != nil {
		return err
	}
	fmt.Fprintln(w, "note: SHAP values are path-dependent TreeSHAP on the raw score; they attribute, they do not prove cause.")
	return nil
}

// ExplainJSON writes the explanation as JSON (schema splitledger/explain/v1).
func ExplainJSON(w io.Writer, x *Explanation) error {
	type feat struct {
		Feature    string `json:"feature"`
		ValueI     Num    `json:"value_i"`
		ValueJ     Num    `json:"value_j"`
		SHAPI      Num    `json:"shap_i"`
		SHAPJ      Num    `json:"shap_j"`
		Difference Num    `json:"difference"`
	}
	out := struct {
		Schema   string `json:"schema"`
		Model    string `json:"model"`
		Class    int    `json:"class"`
		RowI     int    `json:"row_i"`
		RowJ     int    `json:"row_j"`
		MarginI  Num    `json:"margin_i"`
		MarginJ  Num    `json:"margin_j"`
		Features []feat `json:"features"`
	}{Schema: "splitledger/explain/v1", Model: x.Model, Class: x.Class, RowI: x.RowI, RowJ: x.RowJ, MarginI: Num(x.MarginI), MarginJ: Num(x.MarginJ)}
	for _, f := range x.Features {
		out.Features = append(out.Features, feat{f.Feature, Num(f.ValueI), Num(f.ValueJ), Num(f.SHAPI), Num(f.SHAPJ), Num(f.Difference)})
	}
	return writeJSON(w, out)
}
