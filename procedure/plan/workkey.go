package plan

// WorkKey names one point of a campaign: temperature index (into
// Plan.TemperaturePoints), unit id, test kind (unique within a plan),
// repeat, sweep part ("" or PartCM/PartDiff) and step (the position in the
// ordered sweep). Pass-done and test-done markers use the leading fields.
type WorkKey struct {
	TempIndex int    `json:"temp_index"`
	Unit      string `json:"unit"`
	Test      string `json:"test"`
	Repeat    int    `json:"repeat"`
	Part      string `json:"part,omitempty"`
	Step      int    `json:"step"`
}
