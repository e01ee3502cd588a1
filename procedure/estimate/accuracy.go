package estimate

// Accuracy is a DC accuracy specification: ±(GainPPM·10⁻⁶·|reading| +
// OffsetVolts), taken as the half-width of a rectangular distribution (GUM
// 4.3.7: u = a/√3).
type Accuracy struct {
	GainPPM     float64 `json:"gain_ppm"`
	OffsetVolts float64 `json:"offset_volts"`
}
