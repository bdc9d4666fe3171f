package main

import (
	"bytes"
	"encoding/binary"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	bolt "go.etcd.io/bbolt"

	"liftyard/storage"
)

// damageLeaf writes garbage over the leaf page in the middle of the pages
// of raw blocks of db that hold at least two records (small blocks are
// stored in group records, so a short import fills a page or two).
func damageLeaf(t *testing.T, db string) {
	t.Helper()
	bdb, err := bolt.Open(db, 0o600, nil) // read-write: bbolt loads the freelist only then
	require.NoError(t, err)
	var leaves []int
	require.NoError(t, bdb.View(func(tx *bolt.Tx) error {
		for id := 2; ; id++ {
			p, err := tx.Page(id)
			if err != nil || p == nil {
				return err
			}
			if p.Type == "leaf" && p.Count >= 2 {
				leaves = append(leaves, id)
			}
		}
	}))
	size := bdb.Info().PageSize
	require.NoError(t, bdb.Close())
	f, err := os.OpenFile(db, os.O_WRONLY, 0)
	require.NoError(t, err)
	// A leaf of raw blocks, not of the run records (which every read-only
	// verb needs to list the runs) or of the rollups (which are made again
	// from the blocks): its first element has a block's 16-byte key (time,
	// seq) and a value that starts with a block format version (1 to 3).
	data, err := os.ReadFile(db)
	require.NoError(t, err)
	var blockLeaves []int
	for _, id := range leaves {
		p := data[id*size : (id+1)*size]
		const hdr = 16 // page header: id u64, flags u16, count u16, overflow u32
		pos := binary.LittleEndian.Uint32(p[hdr+4:])
		ksize := binary.LittleEndian.Uint32(p[hdr+8:])
		if ksize == 16 && hdr+int(pos)+16 < size {
			if v := p[hdr+int(pos)+16]; v >= 1 && v <= 3 {
				blockLeaves = append(blockLeaves, id)
			}
		}
	}
	require.NotEmpty(t, blockLeaves, "leaf pages of raw blocks among %d leaves", len(leaves))
	victim := blockLeaves[len(blockLeaves)/2]
	_, err = f.WriteAt(bytes.Repeat([]byte{0xa5, 0x3c, 0x00, 0xff}, size/4), int64(victim)*int64(size))
	require.NoError(t, err)
	require.NoError(t, f.Close())
}

// Ensure that the verbs that write refuse a store with a damaged page before
// writing anything (demo and import say so and name repair; the file is
// left as it was), that read-only verbs still read it, and that repair
// copies the readable runs into a new file that takes new runs (issue 16).
func TestRepair_DamagedStoreCLI(t *testing.T) {
	db := filepath.Join(t.TempDir(), "field.db")
	for range 3 { // small blocks: many to a page
		code, _, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", db, "--block-samples", "2", importCSV)
		require.Equal(t, 0, code, errOut)
	}
	damageLeaf(t, db)
	before, err := os.ReadFile(db)
	require.NoError(t, err)

	code, _, errOut := runCLI(t, "demo", "--db", db, "--addr", "127.0.0.1:0", "--for", "3s")
	assert.Equal(t, 1, code)
	assert.Contains(t, errOut, "damaged pages")
	assert.Contains(t, errOut, "liftyard repair --db "+db)
	code, _, errOut = runCLI(t, "import", "--rig", towtankRig, "--db", db, importCSV)
	assert.Equal(t, 1, code)
	assert.Contains(t, errOut, "liftyard repair --db "+db)
	after, err := os.ReadFile(db)
	require.NoError(t, err)
	assert.True(t, bytes.Equal(before, after), "a refused verb changed the damaged file")

	code, out, errOut := runCLI(t, "runs", "--db", db)
	require.Equal(t, 0, code, errOut)
	assert.Contains(t, out, "complete")

	fresh := filepath.Join(t.TempDir(), "saved.db")
	code, out, errOut = runCLI(t, "repair", "--db", db, "--out", fresh)
	assert.Equal(t, 1, code, "something was lost: exit 1\n%s%s", out, errOut)
	assert.Contains(t, out, "copied 3 run(s)")
	assert.Contains(t, out, "not readable: raw/")
	assert.Contains(t, errOut, "the new file holds everything else")

	code, _, errOut = runCLI(t, "import", "--rig", towtankRig, "--db", fresh, importCSV)
	require.Equal(t, 0, code, "the repaired file takes new runs: %s", errOut)
	st, err := storage.Open(fresh, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	runs, err := st.Runs()
	require.NoError(t, err)
	require.Len(t, runs, 4)
	lost := 0
	for _, r := range runs[:3] {
		evs, err := st.Events(r.ID)
		require.NoError(t, err)
		for _, ev := range evs {
			if ev.Kind == storage.EventRepaired {
				lost++
			}
		}
	}
	assert.Equal(t, 1, lost, "exactly the run with the damaged page says what it lost")

	code, _, _ = runCLI(t, "repair", "--db", db)
	assert.Equal(t, 2, code, "repair without --out is bad usage")
	code, _, _ = runCLI(t, "repair", "--db", db, "--out", fresh)
	assert.Equal(t, 2, code, "repair never overwrites a file")
}

// Ensure that serve shows a damaged store read-only (what is readable is
// worth seeing) and still writes nothing to it.
func TestServe_DamagedStoreReadOnly(t *testing.T) {
	db := filepath.Join(t.TempDir(), "field.db")
	code, _, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", db, "--block-samples", "2", importCSV)
	require.Equal(t, 0, code, errOut)
	damageLeaf(t, db)
	before, err := os.ReadFile(db)
	require.NoError(t, err)
	url, stop := startServe(t, db)
	status, body := fetch(t, "GET", url+"api/v1/runs", "", nil)
	assert.Equal(t, 200, status)
	assert.Contains(t, body, `"status":"complete"`)
	status, body = fetch(t, "POST", url+"api/v1/runs/1/marks", `{"start_s": 1, "end_s": 2}`, map[string]string{"Content-Type": "application/json"})
	assert.Equal(t, 405, status, body)
	require.NoError(t, stop())
	after, err := os.ReadFile(db)
	require.NoError(t, err)
	assert.True(t, bytes.Equal(before, after), "serve changed the damaged file")
}
