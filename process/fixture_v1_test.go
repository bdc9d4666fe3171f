package process_test

import (
	"flag"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
	bolt "go.etcd.io/bbolt"

	"liftyard/storage"
)

// genStoreV1 rewrites testdata/store-v1-foil.db: the tow-tank foil record
// imported by the code of before the compact block format and the trend
// rollups (v1 blocks, no rollups). Regenerating it with today's code no
// longer gives an old file; only do it on purpose:
//
//	go test ./process -run '^TestGenerateStoreV1Foil$' -gen-store-v1
var genStoreV1 = flag.Bool("gen-store-v1", false, "rewrite testdata/store-v1-foil.db (an old-format store)")

const storeV1Foil = "testdata/store-v1-foil.db"

func TestGenerateStoreV1Foil(t *testing.T) {
	if !*genStoreV1 {
		t.Skip("fixture generator: run with -gen-store-v1")
	}
	r, text := loadRig(t, foilRig)
	path := filepath.Join(t.TempDir(), "old.db")
	store, err := storage.Open(path, storage.Options{})
	require.NoError(t, err)
	recordFile(t, store, r, text)
	require.NoError(t, store.Close())

	os.Remove(storeV1Foil)
	src, err := bolt.Open(path, 0o600, &bolt.Options{ReadOnly: true})
	require.NoError(t, err)
	defer src.Close()
	dst, err := bolt.Open(storeV1Foil, 0o644, nil)
	require.NoError(t, err)
	require.NoError(t, bolt.Compact(dst, src, 0))
	require.NoError(t, dst.Close())
}
