//! sources: where events come from. Sources do I/O and timestamping only;
//! they hand raw events on and never decode or derive.

pub mod file;
pub mod live;
pub mod serial;
pub mod socketcan;

pub use file::FileSource;
