//! One file per screen. Each exposes `draw(frame, area, app)`: a pure
//! function of the app state.

pub mod battery;
pub mod channels;
pub mod feed;
pub mod help;
pub mod power;
pub mod run;
