package main

import (
	"net"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/rig"
	"liftyard/storage"
)

// Ensure that a recording whose dashboard cannot bind its port fails before
// a run is made, leaving no empty "interrupted" run behind (issue 15).
func TestRecord_PortInUseLeavesNoRun(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	require.NoError(t, err)
	defer ln.Close()
	r, err := demoRig("tcp://127.0.0.1:1")
	require.NoError(t, err)
	r.Sources = []rig.Source{{Name: "carriage", Type: rig.SourceSimulated, RateHz: 200}}
	db := filepath.Join(t.TempDir(), "busy.db")
	m := &Main{Rig: r, RigTOML: string(demoRigTOML), DBPath: db, Addr: ln.Addr().String()}
	err = m.Run(t.Context())
	require.ErrorContains(t, err, "dashboard listen on "+ln.Addr().String())
	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	runs, err := st.Runs()
	require.NoError(t, err)
	assert.Empty(t, runs)
}
