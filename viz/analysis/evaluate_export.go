package analysis

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
)

// WriteCSV writes the per-class table: one line per class with index,
// label, support (images of the class), predicted (images given the class),
// precision, recall, then the class's row of the confusion matrix
// (columns as_0, as_1, …: its images predicted as each class).
func (e *Evaluation) WriteCSV(w io.Writer) error {
	cw := csv.NewWriter(w)
	head := []string{"index", "label", "support", "predicted", "precision", "recall"}
	for c := 0; c < e.Classes; c++ {
		head = append(head, "as_"+strconv.Itoa(c))
	}
	cw.Write(head)
	for _, m := range e.PerClass() {
		row := []string{strconv.Itoa(m.Index), m.Label, strconv.Itoa(m.Support), strconv.Itoa(m.Predicted),
			strconv.FormatFloat(m.Precision, 'g', -1, 64), strconv.FormatFloat(m.Recall, 'g', -1, 64)}
		for _, n := range e.Confusion[m.Index] {
			row = append(row, strconv.Itoa(n))
		}
		cw.Write(row)
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("viz: evaluate: writing CSV: %w", err)
	}
	return nil
}
