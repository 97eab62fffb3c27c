package dw

// Rebuilds returns the number of times m's master was built.
func Rebuilds(m *Model) int { return m.rebuilds }

// ColumnCosts returns Σ_v w[v] a_vj for every column j of m, read row by
// row (over the rows of nonzero weight) when byRow is set, column by
// column otherwise.
func ColumnCosts(m *Model, w []float64, byRow bool) []float64 {
	m.merge()
	c := make([]float64, m.ncols)
	if !byRow {
		m.costsByColumn(w, c)
		return c
	}
	var support []int
	for v, x := range w {
		if x != 0 {
			support = append(support, v)
		}
	}
	m.costsByRow(w, support, c)
	return c
}

// NumLinkingRows returns the number of linking rows of m.
func NumLinkingRows(m *Model) int { return m.nlink() }
