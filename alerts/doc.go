// Package alerts turns findings into alerts that reach the right person
// once, stay until someone deals with them, and escalate when nobody does.
//
// # Lifecycle
//
// States and events use the vocabulary of ISA-18.2 / IEC 62682 (see
// state.go): an alert is raised unacknowledged, can be acknowledged,
// returns to normal when its evidence has been gone for clear_after
// (hysteresis), can be shelved for a set time, and is cleared (closed)
// when it returned to normal and was acknowledged, or by hand. Transition
// is the only place that decides a state change.
//
// One alert exists per zone, kind and location cluster: a finding whose
// best candidates overlap those of an open alert of the same zone and kind
// (or lie within cluster.distance_m of them, when a Locator is given)
// updates that alert instead of raising another. The detector is expected
// to report a finding every step while its evidence holds.
//
// # Routing, escalation, caps
//
// Routes match zone, kind and severity and name escalation levels of
// receivers (people or on-call rotas, resolved at send time in the rota's
// time zone). An unacknowledged alert moves to the next level after the
// level's ack_timeout and is repeated every repeat interval. Each person
// gets at most hourly_cap notifications in any hour; the overflow is held
// and sent as one summary when the window allows.
//
// The cap never delays news of an urgent alert: a notice that an urgent
// alert was raised (or raised again), became urgent, was escalated,
// came back from the shelf or was handed over at a rota change is sent
// at once even over the cap (it counts in the window, and is logged as a
// warning), and goes to the front of its channel's outbox, ahead of
// lower-priority messages waiting there (behind at most the one being
// sent); a full outbox (outbox_limit) drops other notifications, never
// these. Reminders of an urgent alert (repeated) and every notice of a
// high or low alert are capped and queued as usual: the cap is there so
// that a flood of small things cannot bury the big one.
//
// # Delivery
//
// Every notification is written to a durable outbox (bbolt, under
// data_dir) in the same transaction as the alert change that caused it.
// One goroutine per channel, owned by Manager.Run, drains its part of the
// outbox in order, retries with exponential backoff, and appends each
// outcome to the delivery log. After a restart pending notifications are
// sent once; delivered ones are never sent again. Channels implement the
// two-method Channel interface.
//
// # Adding a channel
//
// Write a type with Name() and Send(ctx, Notification) that honours the
// Channel contract (no retries inside, Permanent for hopeless failures,
// ctx respected, no secrets in errors); format with Subject, TextBody or
// MarshalPayload so every channel says the same thing. Give it a config
// struct under ChannelsConfig with an inline Delivery, a receiver contact
// field if people can be reached through it, a case in contactChannels and
// Open's policy table, and build it in BuildChannels. Test it against a
// real receiver started in the test, and add its example to
// TestExamples.
//
// # Wiring (daemon)
//
// DecodeConfig the `alerts:` node, Resolve against the config directory,
// BuildChannels with the service's MQTT publisher, Open with data_dir,
// run Manager.Run in the service's run group, feed findings to Observe,
// mount NewAPI(m, token) with http.StripPrefix("/api/alerts", ...), export
// Counts as plumbline_alerts{state}, and Close after Run returns.
//
// # Conventions
//
// Times are UTC; sizes are L/s; durations are Go durations in the config.
// Errors are wrapped with the alert id, channel or config line. Secrets
// (webhook secret, SMTP password, API token) are read from files and never
// logged or written to the store.
package alerts
