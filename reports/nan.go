package reports

import "math"

var nanValue = math.NaN()
