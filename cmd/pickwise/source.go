package main

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"

	"github.com/pickwise/pickwise/tables/result"
)

// loadSource returns the solution held by SOURCE: a result file (.json) is
// read as written; a model file is solved first. The second value is the
// model as given when known.
func loadSource(path, solverName string, reach int) (*result.Solution, string, int, error) {
	if strings.EqualFold(filepath.Ext(path), ".json") {
		f, err := result.ReadFile(path)
		if err != nil {
			return nil, "", exitUsage, err
		}
		s, err := f.Solution()
		if err != nil {
			return nil, "", exitUsage, fmt.Errorf("%s: %w", path, err)
		}
		return s, f.ModelTOML, 0, nil
	}
	if reach < 0 {
		return nil, "", exitUsage, fmt.Errorf("--reach %d: must be >= 0", reach)
	}
	solver, err := solverByName(solverName)
	if err != nil {
		return nil, "", exitUsage, err
	}
	m, given, err := loadModel(path)
	if err != nil {
		return nil, "", exitUsage, err
	}
	s, err := result.Solve(context.Background(), m, result.Options{Solver: solver, Reach: reach})
	if err != nil {
		return nil, "", solveStatus(err), fmt.Errorf("%s: %w", path, err)
	}
	return s, given, 0, nil
}
