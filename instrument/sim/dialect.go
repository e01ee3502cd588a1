package sim

import (
	"fmt"
	"slices"
	"sort"
	"strings"
)

// Dialect is one way an instrument of the simulated bench can be made to
// speak: another command set, identity and built-in profile for one
// instrument, so that the tool's profile-driven drivers can be tried
// against each common kind of instrument without the hardware. Dialects
// are chosen by name in Config.Dialects (`nullbench sim --dialect`).
type Dialect struct {
	Name string // "dmm_single"
	// Instrument is the bench instrument it changes (NameDMM, NameSwitch,
	// ...); two dialects of one instrument cannot be combined.
	Instrument string
	Doc        string // one line for `nullbench sim --help`
	// apply changes the bench built by New before anything is served.
	apply func(b *Bench) error
}

// Dialects lists every dialect of the simulated bench, sorted by name.
// Each instrument's variants live in their own file (dialect_meter.go,
// dialect_switch.go ...); add a file's list here.
func Dialects() []Dialect {
	var ds []Dialect
	ds = append(ds, meterDialects()...)
	ds = append(ds, switchDialects()...)
	ds = append(ds, supplyDialects()...)
	ds = append(ds, terminatorDialects()...)
	sort.Slice(ds, func(i, j int) bool { return ds[i].Name < ds[j].Name })
	return ds
}

// DialectNames lists the names of Dialects.
func DialectNames() []string {
	var ns []string
	for _, d := range Dialects() {
		ns = append(ns, d.Name)
	}
	return ns
}

// applyDialects applies the named dialects to b in the order given.
func applyDialects(b *Bench, names []string) error {
	all := Dialects()
	seen := map[string]string{} // instrument → dialect
	for _, name := range names {
		name = strings.TrimSpace(name)
		if name == "" {
			continue
		}
		i := slices.IndexFunc(all, func(d Dialect) bool { return d.Name == name })
		if i < 0 {
			return fmt.Errorf("sim: no dialect %q; the bench speaks %s", name, strings.Join(DialectNames(), ", "))
		}
		d := all[i]
		if prev, ok := seen[d.Instrument]; ok {
			return fmt.Errorf("sim: dialects %q and %q both change the %s; choose one", prev, d.Name, d.Instrument)
		}
		seen[d.Instrument] = d.Name
		if err := d.apply(b); err != nil {
			return fmt.Errorf("sim: dialect %s: %w", d.Name, err)
		}
	}
	return nil
}

func errNotDevice(name string) error {
	return fmt.Errorf("the %s is not the bench's own device", name)
}

// redefine gives instrument name a new identity, built-in profile name and
// command set (the device's commands as they now stand, plus the system
// commands every instrument has). Dialects call it after changing the
// device.
func (b *Bench) redefine(name, idn, profile string) error {
	in, ok := b.byName[name]
	if !ok {
		return fmt.Errorf("no instrument %q on the bench", name)
	}
	in.mu.Lock()
	defer in.mu.Unlock()
	in.idn, in.profile, in.cmds = idn, profile, nil
	for _, c := range in.dev.commands() {
		c.nodes = compilePattern(c.pattern)
		in.cmds = append(in.cmds, c)
	}
	in.withSystem()
	return nil
}
