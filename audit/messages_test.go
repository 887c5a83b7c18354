package audit

import "testing"

func TestFmtValue(t *testing.T) {
	// Values in flag messages are Go's %.6g (strconv 'g', 6 significant
	// digits), which never pads trailing zeros: nothing must be trimmed.
	cases := []struct {
		v    float64
		want string
	}{
		{0, "0"},
		{10, "10"},
		{100, "100"},
		{1500, "1500"},
		{120000, "120000"},
		{0.5, "0.5"},
		{2.25, "2.25"},
		{-3, "-3"},
		{1e-7, "1e-07"},
		{3e6, "3e+06"},
		{1234567, "1.23457e+06"},
	}
	for _, tc := range cases {
		t.Run(tc.want, func(t *testing.T) {
			if got := fmtValue(tc.v); got != tc.want {
				t.Errorf("fmtValue(%v) = %q, want %q", tc.v, got, tc.want)
			}
		})
	}
}
