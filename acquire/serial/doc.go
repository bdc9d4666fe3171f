// Package serial reads raw readings from a serial port (a USB adapter on a
// load-cell amplifier, a microcontroller on the rig) with go.bug.st/serial
// and hands them on as acquire.Blocks. It also writes frames for dry runs
// (WriteFrames) and opens pseudo-terminal pairs for tests and for
// simulating a device without hardware (OpenPTY).
//
// # Model
//
// A Source owns one port path. Run opens it (baud rate, data bits, parity
// and stop bits from the rig file), reads lines, parses each one, groups
// consecutive good sample times into Blocks and queues them for out. Every
// line that is not used is counted in Health by its reason; nothing is
// dropped silently.
//
// # Line formats
//
// FormatFrame (acquire.ParseFrame): one line per sample time,
//
//	17,1733061000000000,812.1,201.4*DFD2
//
// seq (32-bit, wraps), device time t_us, the raw values in the order of
// Channels, and the CRC-16/CCITT-FALSE of everything before '*'.
//
// FormatDelimited (acquire.DelimitedFormat): plain lines from third-party
// amplifiers, e.g. Delimiter ";" and Columns ["t_ms", "lift", "_", "pitot"]:
//
//	1250.0 ; 812.4 ; OK ; 201.9
//
// A first line of names (a header) and empty lines are counted once each as
// parse rejections.
//
// Lines longer than acquire.MaxLineBytes (4 KiB) are counted once as parse
// (too long) and skipped to the next newline. A line torn across reads is
// joined; one torn by a lost port is counted as parse.
//
// # Blocks and time
//
// A Block holds up to BlockFrames (50) sample times spanning at most
// BlockSpan (100 ms); a pending block is also flushed when a read waits
// ReadTimeout (100 ms) for data, on a seq gap, and when the spacing changes.
//
//   - Frames and delimited lines with a time column: T0Us is the device time
//     of the first sample, DtUs the spacing of the first two. A sample more
//     than a quarter spacing off the block's grid starts a new block, so
//     every sample time in a block is within DtUs/4 of the device's own.
//   - Delimited lines without a time column: the host receive time stands in
//     for the device clock. Lines come in bursts, so the newest line of the
//     block anchors it (T0Us = its receive time − (n−1)·DtUs) and DtUs is the
//     mean spacing since the previous block's newest line (or over the block
//     after a pause of a second or more).
//   - A block of one sample carries the last spacing seen (1 µs when none was
//     seen yet); its one sample time T0Us is exact either way.
//   - Block.Seq is the seq of the first frame in the block; the block's
//     frames are consecutive, so sample i has seq Seq+i (mod 2^32). For
//     delimited lines, which carry no counter, Seq counts accepted lines
//     from 0 per Run.
//   - Received is the host time of the block's newest line.
//
// # Seq accounting (frames)
//
// A seq one above the last is normal. The same seq again is a duplicate:
// dropped and counted in Duplicates. A jump forward of d > 1 adds d−1 to
// Gaps (missing frames, as the MQTT source counts them) and reports an
// acquire.EventGap whose Duration is (d−1) × spacing from the device clock;
// after a reconnect the outage gap event stands for it and no second event
// is sent. A jump backwards (more than 2^31 forward in 32-bit arithmetic)
// means the device restarted its counter (power cycle, DTR reset): it is
// logged and counting starts afresh. Delimited lines have no counter, so
// only outages are reported as gaps.
//
// # Saturation
//
// RawLimits (from the rig's raw_range) gives a channel's raw limits; each
// reading at or beyond either is counted per channel (Saturated), and the
// first one of each channel is reported as acquire.EventSaturated.
//
// # Backpressure
//
// The read loop never waits for the consumer. Blocks go to a queue of
// QueueBlocks (64) blocks drained into out by a second goroutine; when the
// queue is full the oldest block is dropped and its samples are added to
// SamplesDropped. When ctx ends, queued blocks are handed to out only if it
// has room; the rest are counted as dropped.
//
// # Reconnect policy
//
// Any read error (go.bug.st/serial's PortClosed after an unplug, EIO) means
// the port is gone: the pending block is flushed, the port closed,
// EventDisconnected reported, and the same path reopened after 100 ms,
// doubling to at most 5 s (BackoffMin, BackoffMax). On success the source
// adds one to Reconnects and reports EventReconnected and EventGap, both
// with the outage Duration. A port missing at start is retried the same way
// (the logger may start before the amplifier has power); its first open is
// not a reconnect. Only line settings the driver can never accept make Run
// return an error. Run returns nil when ctx is done; it closes the port to
// wake a blocked read.
//
// # Concurrency
//
// Run uses two goroutines (reader and forwarder) and joins both before it
// returns; it never closes out. Health, Saturated and Connected may be read
// from any goroutine while Run runs. OnEvent is called from the reader and
// must not block. Set the other fields before Run.
//
// # Caveats
//
//   - Use /dev/serial/by-id/... paths on real hardware: the kernel may give a
//     re-plugged adapter a new ttyUSBn, and the by-id link follows it.
//   - Opening a port usually asserts DTR, and boards with an auto-reset
//     circuit (many microcontroller boards) restart on it: expect a seq
//     restart and a few garbage bytes after every open; both are handled.
//   - Modem-line ioctls (DTR, RTS, modem status) fail on pseudo-terminals
//     ("inappropriate ioctl for device"), so this package never sets them.
//   - TIOCEXCL does not stop root from opening a port twice; keep one source
//     per port in the rig file.
//   - A line's byte offset in errors counts from the last (re)open.
package serial
