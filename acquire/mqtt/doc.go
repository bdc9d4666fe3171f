// Package mqtt connects liftyard to MQTT brokers: a Source that subscribes to
// block payloads (acquire.DecodePayload) with paho, a Publisher that sends
// blocks (the simulator's side), an Outbox that publishes messages such as
// live results to a site broker (the rig file's [publish] table), and an
// embedded mochi broker for the demo and tests.
//
// # Delivery
//
// Everything is QoS 1 with a stable client id and a persistent session, so
// the broker queues blocks while we are away. QoS 1 means at least once:
// duplicates are normal and are dropped by the payload's seq; jumps in seq are
// counted as gaps, and late blocks that fill a gap are counted in
// Health.Late (the Source doc has the rules). The paho message handler never
// blocks: it copies the payload into a bounded queue and, when that is full,
// drops the oldest entry and counts it in Health.BlocksDropped (the reader
// must keep reading the socket or the broker link dies).
//
// # Reconnecting
//
// Clients retry the first connection every second until the broker answers
// and reconnect by themselves (back-off up to 5 s) when the link drops. The
// Source re-subscribes on every connect, counts Health.Reconnects and reports
// EventDisconnected (with paho's reason) and EventReconnected (Duration is
// the outage). Errors that retrying cannot fix, before the first connection
// (wrong password, not authorised, a broker certificate we do not trust),
// end Run with an error wrapping ErrRefused that says what to change.
//
// # Credentials and TLS
//
// FromRig and OutboxFromRig read the rig file's tables: the password comes
// from the environment variable named by password_env and is never logged;
// ssl://, tls:// and mqtts:// brokers get TLS with the CA from ca_file.
//
// # Caveats
//
//   - paho's default store resends queued messages in random order after a
//     reconnect; every client here uses the ordered store.
//   - paho completes publish tokens on reconnect before the broker has
//     acknowledged them, so Published counters can run ahead of the broker;
//     only the subscriber's seq accounting proves delivery.
//   - Handlers are installed before Connect, because a persistent session
//     delivers its backlog before the subscription is renewed.
//   - A broker that keeps no sessions across its own restart (mochi in
//     memory, mosquitto with persistence false) drops what is published
//     between its restart and our re-subscription: that shows up as a seq
//     gap, with an EventGap.
//   - mochi denies every client unless an auth hook allows it; the embedded
//     broker allows all and therefore binds to loopback only.
package mqtt
