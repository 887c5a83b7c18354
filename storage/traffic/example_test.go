package traffic_test

import (
	"fmt"
	"log"
	"path/filepath"

	"splitledger/storage/traffic"
)

// Read a traffic sample for a model with eight features, one of them
// categorical, keeping whole query groups up to 20 rows.
func ExampleRead() {
	path := filepath.Join("..", "..", "testdata", "traffic", "seed-snappy-v1-dictionary.parquet")
	f, err := traffic.Read(path, traffic.Options{
		Features: []string{"nightly_price", "photo_count", "review_stars", "host_tier",
			"distance_band", "instant_book", "response_hours", "cancellation_policy"},
		Categories: map[string]map[string]int{
			"cancellation_policy": {"flexible": 0, "moderate": 1, "strict": 2},
		},
		Label:   "booked",
		Group:   "query_id",
		MaxRows: 20,
		Seed:    1,
	})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("%d of %d rows (fraction %.3f)\n", f.Rows, f.TotalRows, f.SampleFraction)
	fmt.Println("missing per feature:", f.Missing)
	fmt.Println("groups:", len(f.Groups()))
	// Output:
	// 17 of 24 rows (fraction 0.708)
	// missing per feature: [3 0 0 0 0 2 0 6]
	// groups: 4
}
