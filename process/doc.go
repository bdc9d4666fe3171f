// Package process is liftyard's one processing pipeline: clock alignment →
// calibration → flow-off zero or zero drift → the rig kind's estimation
// stage, with the channel-health and load monitors beside it.
//
// # Model
//
// A Pipeline turns raw blocks (acquire.Block) into events and result rows
// (estimate.Segment) one block at a time (Step), and gives the live
// moving-window estimate. The live recorder steps it as blocks arrive;
// every offline path — import of a raw CSV, reprocess of a stored run,
// user marks, the zero-drift correction after a run — calls Replay over an
// acquire.Replayer (acquire.CSVFile, acquire.StoredRun). The same blocks
// therefore give the same segments on every path.
//
// A Recorder is a Pipeline bound to a run in the store: it creates the run,
// keeps raw blocks, events and segments through the store's single writer,
// and finishes the run (status, health, the zero-drift correction).
//
// # Rig kinds
//
// The kinds table in kind.go is the one place that maps a rig kind to its
// estimation stage and says whether it takes a flow-off zero and user
// marks. Adding a kind: see "Adding a rig kind" in DEVELOPERS.md.
//
// # Concurrency
//
// Pipeline and Recorder are owned by one goroutine (the recorder loop, or
// the caller of Replay); only Recorder.StoreHealth may be called from
// others. Nothing here listens on the network: offline work needs no
// dashboard.
//
// # Caveats
//
// Replaying a stored run aligns its blocks again in arrival order; a run
// recorded before a change to the estimator gives that change's segments,
// not the stored ones (reprocess makes a new run for that reason).
package process
