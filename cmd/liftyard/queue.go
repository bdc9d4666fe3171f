package main

import (
	"sync/atomic"

	"liftyard/storage"
)

// storeCounter counts the raw blocks that the recorder → store edge dropped
// because the store fell behind.
type storeCounter struct {
	blocks atomic.Uint64
}

// offer queues a raw block for the store without ever blocking the recorder:
// when the queue is full the oldest item is dropped and counted.
func (c *storeCounter) offer(items chan storage.Item, it storage.Item) {
	storage.Offer(items, it, &c.blocks)
}
