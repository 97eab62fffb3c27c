package dw

// MaxChain is maxChain, for the tests.
const MaxChain = maxChain

// RowValues returns m's row values of the point that chooses pick, for
// the linking rows from on, after giving every block a part.
func RowValues(m *Model, pick []uint8, from int) [][]float64 {
	m.assignParts()
	return m.rowValues(&point{pick: pick}, from)
}

// BlockPart returns the part of block b (after RowValues or Solve).
func BlockPart(m *Model, b int) int { return int(m.bpart[b]) }

// RowCounts returns the numbers of row values computed by the full
// product and by updates.
func RowCounts(m *Model) (full, updates int) { return m.rv.full, m.rv.updates }

// Rebuilds returns the number of times m's master was built.
func Rebuilds(m *Model) int { return m.rebuilds }
