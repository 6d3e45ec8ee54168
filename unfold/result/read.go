package result

import (
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/sparse"
)

// Read reads the result folder dir: its result.json and, when present,
// the migrations of response.csv (into Migrations).
func Read(dir string) (*Result, error) {
	data, err := os.ReadFile(filepath.Join(dir, JSONFile))
	if err != nil {
		return nil, fmt.Errorf("result: %w", err)
	}
	var r Result
	if err := json.Unmarshal(data, &r); err != nil {
		return nil, fmt.Errorf("result: %s: %w", filepath.Join(dir, JSONFile), err)
	}
	if r.Format != Format {
		return nil, fmt.Errorf("result: %s: format %q, want %q", filepath.Join(dir, JSONFile), r.Format, Format)
	}
	if len(r.Estimate) != r.TruthBins || len(r.Determined) != r.TruthBins || len(r.Efficiency) != r.TruthBins || len(r.Folded) != r.RecoBins {
		return nil, fmt.Errorf("result: %s: the arrays do not have one entry per bin (%d truth, %d reco bins)", filepath.Join(dir, JSONFile), r.TruthBins, r.RecoBins)
	}
	path := filepath.Join(dir, ResponseFile)
	f, err := os.Open(path)
	if errors.Is(err, fs.ErrNotExist) {
		return &r, nil
	}
	if err != nil {
		return nil, fmt.Errorf("result: %w", err)
	}
	defer f.Close()
	if r.Migrations, err = readResponse(f, path, r.RecoBins, r.TruthBins); err != nil {
		return nil, err
	}
	return &r, nil
}

// readResponse reads the cells of a response.csv (column order, rows
// increasing within a column) into a matrix of nr × nt.
func readResponse(rd io.Reader, path string, nr, nt int) (*sparse.Matrix, error) {
	cr := csv.NewReader(rd)
	cr.FieldsPerRecord = 4
	ptr := make([]int, nt+1)
	var rows []int
	var val []float64
	line := 0
	prevCol, prevRow := 0, -1
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		line++
		if err != nil {
			return nil, fmt.Errorf("result: %s: %w", path, err)
		}
		if line == 1 {
			if strings.Join(rec, ",") != "reco,truth,migrations,probability" {
				return nil, fmt.Errorf("result: %s:1: header %q, want reco,truth,migrations,probability", path, strings.Join(rec, ","))
			}
			continue
		}
		i, err1 := strconv.Atoi(rec[0])
		j, err2 := strconv.Atoi(rec[1])
		v, err3 := strconv.ParseFloat(rec[2], 64)
		if err := errors.Join(err1, err2, err3); err != nil || i < 0 || i >= nr || j < 0 || j >= nt || j < prevCol || j == prevCol && i <= prevRow {
			return nil, fmt.Errorf("result: %s:%d: not a cell of the %d × %d response in column order", path, line, nr, nt)
		}
		for c := prevCol; c < j; c++ {
			ptr[c+1] = len(rows)
		}
		prevCol, prevRow = j, i
		rows, val = append(rows, i), append(val, v)
	}
	for c := prevCol; c < nt; c++ {
		ptr[c+1] = len(rows)
	}
	m, err := sparse.NewMatrix(nr, nt, ptr, rows, val, nil)
	if err != nil {
		return nil, fmt.Errorf("result: %s: %w", path, err)
	}
	return m, nil
}

// ReportFile is the page of the report in the result folder.
const ReportFile = "report.html"

// ReplaceReport replaces the result folder dir by a copy holding a new
// report (the plots and the page) of r on the truth scheme truth (nil
// for none): every file of dir but the plots folder and report.html is
// copied byte for byte into a new folder, the report is written into
// it, and the new folder replaces dir in one atomic step. It returns the
// names of the report's files.
func ReplaceReport(dir string, r *Result, truth *binning.Scheme) ([]string, error) {
	if truth != nil {
		if err := r.checkBins(truth); err != nil {
			return nil, err
		}
	}
	f, err := New(dir, true)
	if err != nil {
		return nil, err
	}
	defer f.Abort()
	err = filepath.WalkDir(dir, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(dir, path)
		if err != nil {
			return err
		}
		rel = filepath.ToSlash(rel)
		switch {
		case rel == PlotsFolder && d.IsDir():
			return filepath.SkipDir
		case d.IsDir() || rel == ReportFile:
			return nil
		}
		in, err := os.Open(path)
		if err != nil {
			return err
		}
		defer in.Close()
		return writeFile(f, rel, func(w io.Writer) error { _, err := io.Copy(w, in); return err })
	})
	if err != nil {
		return nil, fmt.Errorf("result: copying %s: %w", dir, err)
	}
	files, err := writeReport(f, r, truth)
	if err != nil {
		return nil, err
	}
	if err := f.Commit(); err != nil {
		return nil, err
	}
	return files, nil
}
