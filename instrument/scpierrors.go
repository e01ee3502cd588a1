package instrument

import (
	"sort"
)

// ErrorClass is the class of an SCPI error/event number. Negative numbers
// are reserved by SCPI and grouped by hundreds; each group sets one bit of
// the IEEE 488.2 Standard Event Status Register (ESR). Positive numbers are
// the instrument's own (SCPI-99 Vol 2 §21.8).
type ErrorClass int

// Error classes. The first four ranges and their ESR bits are as in
// SCPI-99 Vol 2 §21.8 and IEEE 488.2 §11.5.1: -1xx CME bit 5, -2xx EXE bit 4,
// -3xx DDE bit 3, -4xx QYE bit 2; it also gives OPC as bit 0 and PON as
// bit 7. The event ranges -5xx (power on, PON), -6xx (user request, URQ
// bit 6), -7xx (request control, RQC bit 1) and -8xx (operation complete,
// OPC) are from memory of SCPI-99 §21.8 and the IEEE 488.2 ESR layout.
const (
	ClassNone              ErrorClass = iota // code 0: no error
	ClassCommand                             // -100..-199
	ClassExecution                           // -200..-299
	ClassDeviceSpecific                      // -300..-399
	ClassQuery                               // -400..-499
	ClassPowerOn                             // -500..-599 (from memory)
	ClassUserRequest                         // -600..-699 (from memory)
	ClassRequestControl                      // -700..-799 (from memory)
	ClassOperationComplete                   // -800..-899 (from memory)
	ClassDeviceDefined                       // 1..32767: the instrument's own
	ClassUnknown                             // other negative codes
)

var classInfo = [...]struct {
	name    string
	esrBit  int
	esrName string
}{
	ClassNone:              {"no error", -1, ""},
	ClassCommand:           {"command error", 5, "CME"},
	ClassExecution:         {"execution error", 4, "EXE"},
	ClassDeviceSpecific:    {"device-specific error", 3, "DDE"},
	ClassQuery:             {"query error", 2, "QYE"},
	ClassPowerOn:           {"power-on event", 7, "PON"},
	ClassUserRequest:       {"user-request event", 6, "URQ"},
	ClassRequestControl:    {"request-control event", 1, "RQC"},
	ClassOperationComplete: {"operation-complete event", 0, "OPC"},
	ClassDeviceDefined:     {"device-defined error", -1, ""},
	ClassUnknown:           {"unclassified negative code", -1, ""},
}

func (c ErrorClass) String() string {
	if c < 0 || int(c) >= len(classInfo) {
		return "invalid class"
	}
	return classInfo[c].name
}

// ESRBit is the Standard Event Status Register bit (0..7) the class sets,
// or -1 when it sets none defined by the standard.
func (c ErrorClass) ESRBit() int {
	if c < 0 || int(c) >= len(classInfo) {
		return -1
	}
	return classInfo[c].esrBit
}

// ESRName is the IEEE 488.2 mnemonic of that bit (CME, EXE, DDE, QYE, PON,
// URQ, RQC, OPC), or "".
func (c ErrorClass) ESRName() string {
	if c < 0 || int(c) >= len(classInfo) {
		return ""
	}
	return classInfo[c].esrName
}

// ClassOf classifies an error/event number by its range.
func ClassOf(code int) ErrorClass {
	switch {
	case code == 0:
		return ClassNone
	case code > 0:
		return ClassDeviceDefined
	case code <= -100 && code >= -199:
		return ClassCommand
	case code <= -200 && code >= -299:
		return ClassExecution
	case code <= -300 && code >= -399:
		return ClassDeviceSpecific
	case code <= -400 && code >= -499:
		return ClassQuery
	case code <= -500 && code >= -599:
		return ClassPowerOn
	case code <= -600 && code >= -699:
		return ClassUserRequest
	case code <= -700 && code >= -799:
		return ClassRequestControl
	case code <= -800 && code >= -899:
		return ClassOperationComplete
	}
	return ClassUnknown
}

// StandardError is one SCPI-99 standard error/event number and its
// published meaning.
type StandardError struct {
	Code       int
	Meaning    string
	FromMemory bool // true: recalled from SCPI-99 §21.8, not checked against a copy
}

// Class is the class of the code's range.
func (s StandardError) Class() ErrorClass { return ClassOf(s.Code) }

// StandardErrors returns the SCPI-99 standard error/event numbers (SCPI-99
// Vol 2 §21.8), sorted by code, descending (0, -100, -101, ...). Entries with
// FromMemory false are exactly those checked against a restatement of §21.8; the others
// are from memory of §21.8 and should be checked against the standard before
// being relied on. Instruments vary in capitals and wording, so compare
// codes, not text (common practice: instruments vary).
func StandardErrors() []StandardError {
	out := make([]StandardError, len(standardErrors))
	copy(out, standardErrors)
	return out
}

// LookupStandardError finds a code in StandardErrors.
func LookupStandardError(code int) (StandardError, bool) {
	i := sort.Search(len(standardErrors), func(i int) bool { return standardErrors[i].Code <= code })
	if i < len(standardErrors) && standardErrors[i].Code == code {
		return standardErrors[i], true
	}
	return StandardError{}, false
}

// standardErrors is sorted by code, descending. recalled(...) marks an entry
// from memory of SCPI-99 Vol 2 §21.8; listed(...) one checked against a restatement of §21.8.
var standardErrors = []StandardError{
	listed(0, "No error"),
	listed(-100, "Command error"),
	recalled(-101, "Invalid character"),
	listed(-102, "Syntax error"),
	listed(-103, "Invalid separator"),
	listed(-104, "Data type error"),
	recalled(-105, "GET not allowed"),
	listed(-108, "Parameter not allowed"),
	listed(-109, "Missing parameter"),
	recalled(-110, "Command header error"),
	recalled(-111, "Header separator error"),
	recalled(-112, "Program mnemonic too long"),
	listed(-113, "Undefined header"),
	listed(-114, "Header suffix out of range"),
	recalled(-115, "Unexpected number of parameters"),
	listed(-120, "Numeric data error"),
	recalled(-121, "Invalid character in number"),
	recalled(-123, "Exponent too large"),
	recalled(-124, "Too many digits"),
	recalled(-128, "Numeric data not allowed"),
	listed(-130, "Suffix error"),
	recalled(-131, "Invalid suffix"),
	recalled(-134, "Suffix too long"),
	recalled(-138, "Suffix not allowed"),
	recalled(-140, "Character data error"),
	recalled(-141, "Invalid character data"),
	recalled(-144, "Character data too long"),
	recalled(-148, "Character data not allowed"),
	recalled(-150, "String data error"),
	recalled(-151, "Invalid string data"),
	recalled(-158, "String data not allowed"),
	recalled(-160, "Block data error"),
	recalled(-161, "Invalid block data"),
	recalled(-168, "Block data not allowed"),
	recalled(-170, "Expression error"),
	recalled(-171, "Invalid expression"),
	recalled(-178, "Expression data not allowed"),
	recalled(-180, "Macro error"),
	recalled(-181, "Invalid outside macro definition"),
	recalled(-183, "Invalid inside macro definition"),
	recalled(-184, "Macro parameter error"),
	listed(-200, "Execution error"),
	recalled(-201, "Invalid while in local"),
	recalled(-202, "Settings lost due to rtl"),
	recalled(-203, "Command protected"),
	recalled(-210, "Trigger error"),
	recalled(-211, "Trigger ignored"),
	recalled(-212, "Arm ignored"),
	listed(-213, "Init ignored"),
	recalled(-214, "Trigger deadlock"),
	recalled(-215, "Arm deadlock"),
	recalled(-220, "Parameter error"),
	listed(-221, "Settings conflict"),
	listed(-222, "Data out of range"),
	recalled(-223, "Too much data"),
	listed(-224, "Illegal parameter value"),
	recalled(-225, "Out of memory"),
	recalled(-226, "Lists not same length"),
	recalled(-230, "Data corrupt or stale"),
	recalled(-231, "Data questionable"),
	recalled(-232, "Invalid format"),
	recalled(-233, "Invalid version"),
	recalled(-240, "Hardware error"),
	recalled(-241, "Hardware missing"),
	recalled(-250, "Mass storage error"),
	recalled(-251, "Missing mass storage"),
	recalled(-252, "Missing media"),
	recalled(-253, "Corrupt media"),
	recalled(-254, "Media full"),
	recalled(-255, "Directory full"),
	recalled(-256, "File name not found"),
	recalled(-257, "File name error"),
	recalled(-258, "Media protected"),
	recalled(-260, "Expression error"),
	recalled(-261, "Math error in expression"),
	recalled(-270, "Macro error"),
	recalled(-271, "Macro syntax error"),
	recalled(-272, "Macro execution error"),
	recalled(-273, "Illegal macro label"),
	recalled(-274, "Macro parameter error"),
	recalled(-275, "Macro definition too long"),
	recalled(-276, "Macro recursion error"),
	recalled(-277, "Macro redefinition not allowed"),
	recalled(-278, "Macro header not found"),
	recalled(-280, "Program error"),
	recalled(-281, "Cannot create program"),
	recalled(-282, "Illegal program name"),
	recalled(-283, "Illegal variable name"),
	recalled(-284, "Program currently running"),
	recalled(-285, "Program syntax error"),
	recalled(-286, "Program runtime error"),
	recalled(-290, "Memory use error"),
	recalled(-291, "Out of memory"),
	recalled(-292, "Referenced name does not exist"),
	recalled(-293, "Referenced name already exists"),
	recalled(-294, "Incompatible type"),
	listed(-300, "Device-specific error"),
	recalled(-310, "System error"),
	recalled(-311, "Memory error"),
	recalled(-312, "PUD memory lost"),
	recalled(-313, "Calibration memory lost"),
	recalled(-314, "Save/recall memory lost"),
	recalled(-315, "Configuration memory lost"),
	recalled(-320, "Storage fault"),
	recalled(-321, "Out of memory"),
	recalled(-330, "Self-test failed"),
	recalled(-340, "Calibration failed"),
	listed(-350, "Queue overflow"),
	recalled(-360, "Communication error"),
	recalled(-361, "Parity error in program message"),
	recalled(-362, "Framing error in program message"),
	recalled(-363, "Input buffer overrun"),
	recalled(-365, "Time out error"),
	recalled(-400, "Query error"),
	listed(-410, "Query INTERRUPTED"),
	listed(-420, "Query UNTERMINATED"),
	listed(-430, "Query DEADLOCKED"),
	recalled(-440, "Query UNTERMINATED after indefinite response"),
	recalled(-500, "Power on"),
	recalled(-600, "User request"),
	recalled(-700, "Request control"),
	recalled(-800, "Operation complete"),
}

// listed makes an entry checked against a restatement of SCPI-99 Vol 2 §21.8.
func listed(code int, meaning string) StandardError {
	return StandardError{Code: code, Meaning: meaning}
}

// recalled makes an entry from memory of SCPI-99 Vol 2 §21.8.
func recalled(code int, meaning string) StandardError {
	return StandardError{Code: code, Meaning: meaning, FromMemory: true}
}
