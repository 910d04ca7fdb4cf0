//! share: one run, many screens. Publishes a running stream (a live
//! session, a rehearsal, a replay) through an MQTT broker, and follows one
//! from a broker.
//!
//! The station that reads the car stays the record of truth. The driver
//! hands snapshots to a [`publisher::ShareSink`] that never waits: the
//! network, the JSON and the broker's pace all live in the publisher's own
//! thread behind bounded queues ([`queue`]), and what could not be shared is
//! counted ([`publisher::ShareStats`]) and said in the summary.
//!
//! - [`broker`]: the broker URL (`mqtt://`, `mqtts://`) and connection
//!   options.
//! - [`credentials`]: username and password from a file only its owner can
//!   read, or the environment; never the command line.
//! - [`topics`]: the topic of each kind of message under a prefix.
//! - [`payload`]: the JSON payloads and their schema version.
//! - [`publisher`]: the sink, the queues and the publishing thread.
//! - [`requests`]: acknowledgements and marks sent back by followers, and
//!   the reading station's checks on them.
//! - [`follower`]: subscribing to a shared run and checking what arrives.
//! - [`remote`]: the run rebuilt on a follower from its description and
//!   event batches (its own engine), with lost batches noted where they were.
//!
//! Imports: `engine`, `stream` (the sink contract, and the operator
//! actions followers' acknowledgements and marks become), `headless` (the
//! snapshot JSON), `record` (an event as a recording line), `config` and
//! vocabulary. Nothing here imports `ui` or `cmd`.

pub mod broker;
pub mod credentials;
pub mod follower;
pub mod payload;
pub mod publisher;
pub mod queue;
pub mod remote;
pub mod requests;
pub mod topics;

pub use broker::{BrokerError, BrokerUrl, TlsFiles};
pub use credentials::{Credentials, CredentialsError};
pub use publisher::{ShareSettings, ShareSink, ShareStats};
pub use topics::{TopicError, Topics};
