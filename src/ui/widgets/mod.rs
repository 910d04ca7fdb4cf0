//! Widgets of termvel's own: large figures and labelled meters.

pub mod figures;
pub mod meter;
