// Package acquire reads raw readings from sensors and loggers and hands them
// on as Blocks, counting everything that goes wrong on the way.
//
// # Model
//
// A Source (an MQTT subscription, a serial port, the simulator) produces
// Blocks. A Block is a set of raw readings, one Series per channel, that share
// one timebase: sample i was taken at device time T0Us + i·DtUs. Raw means
// raw: ADC counts, millivolts, whatever the amplifier sends; calibration is
// the next stage's job. NaN marks "no sample".
//
// Every Source keeps a Health: blocks and samples accepted, frames rejected
// by reason (CRC, parse, field count, range, NaN), blocks and samples dropped
// on full queues, duplicates, gaps and reconnects. Counters only increase;
// Snapshot copies them for storage and display.
//
// # Wire format
//
// DecodePayload and EncodePayload handle the MQTT block payload:
//
//	{"seq":17,"t_us":1733061000000000,"dt_us":1000,"v":{"n_fore":[812.1,813.0],"pitot":[201.4,201.9]}}
//
// Subpackages: acquire/mqtt (paho source and publisher, embedded broker) and
// acquire/sim (a simulated tow rig for demos and tests).
//
// # Concurrency
//
// A Source's Run never blocks its reader on a full output: it drops and
// counts. Health counters may be read from any goroutine while Run runs.
// Blocks are owned by whoever receives them.
package acquire
