package storage

import "liftyard/acquire"

// ackBlocks tells the sources of blocks that their blocks are stored (or
// counted as rejected or dropped): an MQTT source then acknowledges the
// messages to its broker, which until then keeps them for redelivery.
func ackBlocks(blocks []*acquire.Block) {
	for _, b := range blocks {
		b.Done()
	}
}
