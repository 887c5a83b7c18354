package reports

import (
	"io"

	"github.com/olekukonko/tablewriter"
	"github.com/olekukonko/tablewriter/renderer"
	"github.com/olekukonko/tablewriter/tw"
)

// newTable returns a table writer with ASCII or light box borders, headers
// left as written.
func newTable(w io.Writer, ascii bool, header []string) *tablewriter.Table {
	style := tw.StyleLight
	if ascii {
		style = tw.StyleASCII
	}
	t := tablewriter.NewTable(w,
		tablewriter.WithRenderer(renderer.NewBlueprint(tw.Rendition{Symbols: tw.NewSymbols(style)})),
		tablewriter.WithHeaderAutoFormat(tw.Off),
		tablewriter.WithRowAutoWrap(tw.WrapNone),
		tablewriter.WithHeaderAlignment(tw.AlignLeft),
		tablewriter.WithRowAlignment(tw.AlignLeft),
	)
	t.Header(header)
	return t
}
