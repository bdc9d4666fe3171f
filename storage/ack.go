package storage

import "liftyard/acquire"

// AckBatch commits early once this many blocks waiting for their
// acknowledgement are pending. A broker sends a client only so many
// unacknowledged QoS 1 messages (mosquitto's max_inflight_messages is 20 by
// default: the example mosquitto.conf of Debian's mosquitto 2.0.11);
// waiting the whole commit interval with the window full would
// cap a source at 20 blocks per interval (100 a second). 16 keeps the
// window open: at 100 blocks a second it costs about 6 commits a second
// instead of 5.
const AckBatch = 16

// ackBlocks tells the sources of blocks that their blocks are stored (or
// counted as rejected or dropped): an MQTT source then acknowledges the
// messages to its broker, which until then keeps them for redelivery.
func ackBlocks(blocks []*acquire.Block) {
	for _, b := range blocks {
		b.Done()
	}
}
