//! How the API's requests come off the wire: a gRPC framing reader that decodes each message
//! with prost in the handler's task ([`inbound`]), the mapping of decode failures to per-item
//! refusals with field paths ([`decode`]), and the tower service that routes the API's RPCs
//! through them ([`routes`]). Bad input is INVALID_ARGUMENT, over-size input RESOURCE_EXHAUSTED;
//! in a stream each bad item is answered on its own and the stream goes on.

pub mod decode;
pub mod inbound;
pub mod routes;

pub use decode::{BadItem, ItemKind};
pub use inbound::Inbound;
pub use routes::{ApiRoutes, SERVICE_NAME};
