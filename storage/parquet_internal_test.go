package storage

import "testing"

// SetParquetRowGroupCells sets the row group bound of sample files for
// one test, so a short run spans several row groups.
func SetParquetRowGroupCells(tb testing.TB, n int) {
	old := parquetRowGroupCells
	parquetRowGroupCells = n
	tb.Cleanup(func() { parquetRowGroupCells = old })
}
