// Package instrumenttest records and plays back SCPI exchanges, so that
// tests of drivers and procedures run without instruments and read like a
// bench log:
//
//	conn := instrumenttest.NewPlayback(t, []instrumenttest.Exchange{
//		{Comment: "identify", Send: "*IDN?", Reply: "NULLBENCH-SIM,DMM-65,SIM0001,1.0"},
//		{Comment: "set range", Send: "CONF:VOLT:DC 10"},
//		{Comment: "check errors", Send: "SYST:ERR?", Reply: `0,"No error"`},
//	})
//	s := instrument.NewSession("dmm", conn, instrument.SessionOptions{CheckErrors: true})
//
// A Playback fails the test on any command that is not the next one in
// the script, and, at Close or at the end of the test, if exchanges were
// left unused. A Recorder wraps a real Conn and writes down what passed, in
// the same form; WriteScript and ParseScript keep scripts in text files.
//
// Scripts use the SCPI forms of the bench contract (instrument/sim/doc.go); the
// terminator is LF, and a CR before it is accepted, as on a raw socket
// (SCPI-99; IEEE 488.2).
package instrumenttest
