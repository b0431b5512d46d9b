//! The team store (feature `team`): several analysts' local stores following one history kept
//! on a PostgreSQL server. `server.rs` is the only code that speaks to PostgreSQL; `sync.rs`
//! starts, joins, publishes and receives; `audit.rs` copies the server's objects for `verify`.

pub mod audit;
pub mod server;
pub mod sync;

pub use server::{Address, Server, ServerEnv, without_password};
pub use sync::{Link, Published, Received, Replayed, create, join, link, publish, receive};
