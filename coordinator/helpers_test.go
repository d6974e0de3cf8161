package coordinator

import (
	"encoding/json"
	"math"
)

func jsonUnmarshal(b []byte, v any) error { return json.Unmarshal(b, v) }

func nan() float64 { return math.NaN() }
