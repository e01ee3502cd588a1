package journal

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
)

// The journal is tamper-evident: every record carries in its "chain" field
// a running hash of itself and every record before it,
//
//	chain_1 = SHA-256("" ‖ "\n" ‖ body_1)
//	chain_i = SHA-256(chain_(i−1) ‖ "\n" ‖ body_i)
//
// (hex), where body_i is the record's JSON encoding without the chain
// field, as Write produces it (SHA-256: FIPS 180-4). Changing, inserting or
// deleting a line breaks the chain at that line; a journal cut at a line
// boundary keeps a valid chain, so its length and last chain value are
// recorded beside it (the run folder's manifest) and ChainCheck compares
// them. Journals written before the chain existed carry no chain field and
// are read as unchained (Contents.Chained false).

// chainNext is the chain value of a record whose body (JSON without the
// chain field) is body, following prev.
func chainNext(prev string, body []byte) string {
	h := sha256.New()
	h.Write([]byte(prev))
	h.Write([]byte{'\n'})
	h.Write(body)
	return hex.EncodeToString(h.Sum(nil))
}

// encodeChained returns the JSON line of rec (without newline) with its
// chain field set from prev, and the new chain value.
func encodeChained(rec Record, prev string) ([]byte, string, error) {
	rec.Chain = ""
	body, err := json.Marshal(rec)
	if err != nil {
		return nil, "", err
	}
	rec.Chain = chainNext(prev, body)
	line, err := json.Marshal(rec)
	if err != nil {
		return nil, "", err
	}
	return line, rec.Chain, nil
}

// verifyChain checks the chain value of a record read from line number
// line, given the previous record's chain value, and advances c's chain
// state. The first break is kept in c.ChainBreakLine; later lines are not
// checked against it (one break is enough to distrust the rest).
func (c *Contents) verifyChain(rec Record, line int) {
	c.LastTime = rec.Time
	if rec.Kind == RecordEvent {
		c.EventTimes = append(c.EventTimes, rec.Time)
	}
	first := c.Records == 0
	if first {
		c.Chained = rec.Chain != ""
	}
	if !c.Chained {
		if rec.Chain != "" && c.ChainBreakLine == 0 {
			// A chained record after unchained ones: lines were spliced in.
			c.ChainBreakLine = line
		}
		return
	}
	got := rec.Chain
	if got == "" {
		if c.ChainBreakLine == 0 {
			c.ChainBreakLine = line
		}
		return
	}
	rec.Chain = ""
	body, err := json.Marshal(rec)
	if err != nil || chainNext(c.LastChain, body) != got {
		if c.ChainBreakLine == 0 {
			c.ChainBreakLine = line
		}
	}
	// Continue from the stored value, so that a single edited line is
	// named and the lines after it still verify against each other.
	c.LastChain = got
}

// Seal is what a journal's reader needs to know that nothing was cut off
// its end: the number of complete records and the chain value of the last
// one, recorded beside the journal when its outputs are written.
type Seal struct {
	Records int    `json:"records"`
	Chain   string `json:"chain"`
}

// Seal returns the journal's seal as read.
func (c *Contents) Seal() Seal { return Seal{Records: c.Records, Chain: c.LastChain} }

// IntegrityError says where a journal stops being trustworthy.
type IntegrityError struct {
	Line   int    // the first line that does not verify (or the first line missing)
	Detail string // what was found
}

func (e *IntegrityError) Error() string {
	return fmt.Sprintf("journal edited or truncated at line %d (%s)", e.Line, e.Detail)
}

// CheckIntegrity reports whether the journal's chain holds and, when a seal
// recorded earlier is given (Records > 0), whether the journal still holds
// every record the seal counts, ending on the same chain value. It returns
// nil for an intact journal and an *IntegrityError naming the first bad
// line otherwise. An unchained (old) journal passes the chain check but not
// a seal with a chain value.
func (c *Contents) CheckIntegrity(seal Seal) error {
	if c.ChainBreakLine > 0 {
		return &IntegrityError{Line: c.ChainBreakLine, Detail: "its running hash does not match the lines before it"}
	}
	if seal.Records <= 0 {
		return nil
	}
	switch {
	case c.Records < seal.Records:
		return &IntegrityError{Line: c.RecordLines + 1, Detail: fmt.Sprintf("%d records where the run folder's manifest counts %d", c.Records, seal.Records)}
	case seal.Chain != "" && c.chains[seal.Records-1] != seal.Chain:
		return &IntegrityError{Line: seal.Records, Detail: fmt.Sprintf("record %d's running hash differs from the one the run folder's manifest recorded", seal.Records)}
	}
	return nil
}
