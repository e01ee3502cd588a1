package report

import (
	"bytes"
	"encoding/json"
	"math"
	"testing"
)

// TestResultsJSONPredictedAchieved: the results JSON lines carry the
// achieved and the predicted expanded U; an unknown prediction is null.
func TestResultsJSONPredictedAchieved(t *testing.T) {
	rs := []Result{
		{Unit: "U01", Test: "cmrr", CoefficientExpandedUUVPerV: 0.25, PredictedUUVPerV: 0.2, TemperatureC: 25},
		{Unit: "U01", Test: "psrr_worst", CoefficientExpandedUUVPerV: 0.3, PredictedUUVPerV: math.NaN(), TemperatureC: 25},
	}
	var buf bytes.Buffer
	if err := WriteResultsJSONL(&buf, rs); err != nil {
		t.Fatal(err)
	}
	dec := json.NewDecoder(&buf)
	var first, second map[string]any
	if err := dec.Decode(&first); err != nil {
		t.Fatal(err)
	}
	if err := dec.Decode(&second); err != nil {
		t.Fatal(err)
	}
	if first["coefficient_expanded_u_uv_per_v"] != 0.25 || first["predicted_u_uv_per_v"] != 0.2 {
		t.Errorf("first line %v", first)
	}
	if v, ok := second["predicted_u_uv_per_v"]; !ok || v != nil {
		t.Errorf("unknown prediction should be null, got %v (present %v)", v, ok)
	}
}
