// Package leakage computes the real-loss figures of the water trade from
// quantities the detector and the configuration already have: the
// night-day factor of a zone from its pressure profile and the FAVAD
// leakage exponent N1 (May 1994; Lambert 2001), daily real losses from
// the night leakage rate, the unavoidable annual real losses (UARL) of
// Lambert et al. (1999) and the Infrastructure Leakage Index (ILI).
//
// Conventions:
//   - Units are those of the trade formulas, named in every identifier:
//     flow in L/s, volumes in m³ or L per day, pressure in m of water,
//     lengths in km, the night-day factor in hours per day.
//   - Functions are pure: no state, no allocation beyond their result,
//     safe for concurrent use.
//   - Bad input (negative lengths, non-finite values, a zero night
//     pressure) is an error naming the argument; nothing panics.
//
// Sources (the formulas as they are usually quoted; page numbers from
// memory where given):
//   - May, J. (1994) "Pressure dependent leakage", World Water and
//     Environmental Engineering: leak flow varies as pressure^N1 (FAVAD,
//     fixed and variable area discharges).
//   - Lambert, A. O. (2001) "What do we know about pressure:leakage
//     relationships in distribution systems?", IWA conference on system
//     approach to leakage control and water distribution systems
//     management, Brno: the night-day factor as the sum over the hours
//     of the day of (P_h/P_night)^N1, and N1 = 1 as the default for large
//     systems of mixed pipe materials (from memory).
//   - Lambert, A. O., Brown, T. G., Takizawa, M. and Weimer, D. (1999)
//     "A review of performance indicators for real losses from water
//     supply systems", Journal of Water Supply: Research and
//     Technology - AQUA 48(6): UARL (L/day) = (18·Lm + 0.8·Nc + 25·Lp)·P,
//     valid as a rule for Nc > 5000 and P > 25 m (from memory).
package leakage
