package run

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
)

// SplitStatus is where an unfinished split run stands, phase by phase.
type SplitStatus struct {
	Dir    string        `json:"dir"`
	Spec   string        `json:"spec"`
	Phases []PhaseStatus `json:"phases"`
}

// PhaseStatus counts a phase's units; Failed and Missing list the units
// not done (a failed unit wrote its error, host and inputs).
type PhaseStatus struct {
	Name    string        `json:"name"`
	Units   int           `json:"units"`
	Done    int           `json:"done"`
	Failed  []UnitFailure `json:"failed,omitempty"`
	Missing []int         `json:"missing,omitempty"`
	// Rerun is the command that finishes the phase (any --tasks works:
	// finished units are skipped).
	Rerun string `json:"rerun,omitempty"`
}

// UnitFailure is a failed unit's marker.
type UnitFailure struct {
	Unit   int      `json:"unit"`
	Error  string   `json:"error"`
	Host   string   `json:"host"`
	PID    int      `json:"pid"`
	Inputs []string `json:"inputs"`
}

// ReadSplitStatus reads the units of the split run in dir.
func ReadSplitStatus(dir string) (*SplitStatus, error) {
	if abs, err := filepath.Abs(dir); err == nil {
		dir = abs
	}
	b, err := os.ReadFile(filepath.Join(dir, unitsDir, "inputs.json"))
	if err != nil {
		return nil, err
	}
	var f frozenInputs
	if err := json.Unmarshal(b, &f); err != nil {
		return nil, fmt.Errorf("%s: %w", filepath.Join(dir, unitsDir, "inputs.json"), err)
	}
	st := &SplitStatus{Dir: dir, Spec: f.Spec}
	for i, name := range f.Phases {
		ps := PhaseStatus{Name: name, Units: f.Units}
		if i < len(f.PhaseUnits) {
			ps.Units = f.PhaseUnits[i]
		}
		for u := 0; u < ps.Units; u++ {
			if name == PhaseWrite {
				if _, err := os.Stat(filepath.Join(dir, "manifest.json")); err == nil {
					ps.Done++
				} else {
					ps.Missing = append(ps.Missing, 0)
				}
				continue
			}
			m, err := readMarker(dir, name, u)
			if err != nil {
				return nil, err
			}
			if m != nil {
				ps.Done++
				continue
			}
			if b, err := os.ReadFile(failedMarker(dir, name, u)); err == nil {
				var fm unitMarker
				if json.Unmarshal(b, &fm) == nil {
					ps.Failed = append(ps.Failed, UnitFailure{Unit: u, Error: fm.Error, Host: fm.Host, PID: fm.PID, Inputs: fm.Inputs})
					continue
				}
			}
			ps.Missing = append(ps.Missing, u)
		}
		if ps.Done < ps.Units {
			ps.Rerun = fmt.Sprintf("winnow run %s --out %s --phase %s", f.Spec, dir, name)
		}
		st.Phases = append(st.Phases, ps)
	}
	return st, nil
}
