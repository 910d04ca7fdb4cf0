//! Pure physics for termvel's derived quantities: small functions of plain
//! numbers, SI inside (temperatures in °C at the interface where noted), no
//! I/O, no clocks, no state. The engine calls them; the tests pin them to
//! published check values.
//!
//! Sources, by module:
//!
//! - [`air`]: moist-air density by the CIPM-2007 equation (Picard, Davis,
//!   Gläser, Fujii, *Metrologia* 45 (2008) 149–155); the ISA troposphere
//!   (ISO 2533, US Standard Atmosphere 1976) as the fallback without weather
//!   data.
//! - [`roadload`]: road-load power split into aerodynamic, rolling and grade
//!   terms; the coast-down form F = A + B·v + C·v² of SAE J2263 / J1263
//!   (ISO 10521); tyre rolling-resistance speed dependence after Wong,
//!   *Theory of Ground Vehicles*.
//! - [`motion`]: power-limited longitudinal motion m·v·dv/dt = P − k·v³ − c·v:
//!   terminal speed by Cardano's formula, closed-form time and distance for
//!   c = 0 (partial fractions), and a fixed-step RK4 integrator for the
//!   projection.
//! - [`battery`]: HPPC power capability (USABC / INL battery test manuals),
//!   the first-order equivalent-circuit pulse limit (Plett, *Battery
//!   Management Systems* vol. II; IEEE Trans. Veh. Technol. 2004),
//!   energy-, thermal- and derating-limited boost time.
//! - [`braking`]: braking distance and time at constant deceleration plus
//!   aerodynamic drag (closed forms of dv/dt = −(a_b + κ·v²)); tyre speed
//!   margin.

pub mod air;
pub mod braking;
pub mod motion;
pub mod pack;
pub mod roadload;
