// Package sim turns a network and a scenario into the telemetry a utility
// would see, and the ground truth behind it: an extended-period run of
// steady states (model/hydraulic) at a fixed step.
//
// Each step it sets the junction demands (base × pattern × a day factor
// per zone × a per-junction random factor, with weekday and weekend
// shapes), the leak outflows (FAVAD, q = C·p^N1, May 1994) and blockages
// (a link's head loss multiplied by 1/f² for an open fraction f), carries
// tank levels by their net inflow, switches pumps by the level of the tank
// they fill, solves, and samples each sensor's true value. The instrument
// model then adds what real loggers add: noise of the sensor's accuracy,
// quantisation, a logging interval, missing readings and late or
// out-of-order delivery, and the scenario's sensor faults.
//
// Everything random comes from one seeded source, so the same network,
// settings and seed give the same readings bit for bit. Units are
// canonical inside; each reading leaves in its sensor's unit.
package sim
