// Package acquire reads raw readings from sensors and loggers and hands them
// on as Blocks, counting everything that goes wrong on the way.
//
// # Model
//
// A Source produces Blocks. A Block is a set of raw readings from one source,
// one Series per channel, that share one timebase: sample i was taken at
// device time T0Us + i·DtUs. Raw means raw: ADC counts, millivolts, whatever
// the amplifier sends; calibration is the next stage's job. NaN marks "no
// sample". The sources live in subpackages grouped by what they depend on:
// acquire/serial (go.bug.st/serial), acquire/mqtt (paho, and an embedded
// mochi broker) and acquire/sim (simulated foil and roof rigs); each imports
// acquire and rig only, never a sibling.
//
// # Formats
//
// This package parses what the sources receive, so each parser is tested
// and fuzzed once: ParseFrame/AppendFrame (a serial line with seq, device
// time, values and a CRC-16/CCITT-FALSE), DelimitedFormat (plain lines from
// third-party amplifiers), DecodePayload/EncodePayload (the MQTT block
// payload) and ReadRawCSV (a recorded raw CSV file, replayed as Blocks):
//
//	{"seq":17,"t_us":1733061000000000,"dt_us":1000,"v":{"n_fore":[812.1,813.0],"pitot":[201.4,201.9]}}
//
// A bad frame or payload is an error (FrameError, PayloadError, each wrapping
// a documented sentinel); a bad raw CSV file is a *rig.Error naming its line.
//
// # Health and events
//
// Every Source keeps a Health: blocks and samples accepted, frames rejected
// by Reason (CRC, parse, field count, range, NaN), blocks and samples dropped
// on full queues, duplicates, gaps, late arrivals and reconnects. Counters
// only increase; Snapshot copies them for storage and display. Outages, gaps,
// the first bad frame of each reason and saturation are reported as Events.
// A Monitor keeps each channel's rate, missing and saturated samples and
// staleness.
//
// # Time
//
// Each device stamps samples with its own clock. A Clock maps one source's
// device time onto the host clock from the lower envelope of (receive time −
// device time), with its offset and drift; an Aligner keeps one Clock per
// source and sets Block.AlignedT0Us, the timeline on which estimate joins
// channels from several sources (timebase.go explains the method and its
// limit: a transport delay that never drops near zero).
//
// # Concurrency
//
// A Source's Run never blocks its reader on a full output: it drops and
// counts. Health counters may be read from any goroutine while Run runs.
// Blocks are owned by whoever receives them. Monitor, Clock and Aligner are
// not safe for concurrent use; the recorder owns them.
package acquire
