// Package mqtt connects liftyard to MQTT brokers: a Source that subscribes to
// block payloads (DESIGN §3.3) with paho, a Publisher that sends blocks (the
// simulator's side, and later live results), and an embedded mochi broker
// for the demo and tests.
//
// # Delivery
//
// Everything is QoS 1 with a stable client id and a persistent session, so
// the broker queues blocks while we are away. QoS 1 means at least once:
// duplicates are normal and are dropped by the payload's seq; jumps in seq are
// counted as gaps. The paho message handler never blocks: it copies the
// payload into a bounded queue and, when that is full, drops the oldest entry
// and counts it in Health.BlocksDropped (the reader must keep
// reading the socket or the broker link dies).
//
// # Caveats
//
//   - paho's default store resends queued messages in random order after a
//     reconnect; publishers here use the ordered store.
//   - Handlers are installed before Connect, because a persistent session
//     delivers its backlog before the subscription is renewed.
//   - mochi denies every client unless an auth hook allows it; the embedded
//     broker allows all and therefore binds to loopback only.
package mqtt
