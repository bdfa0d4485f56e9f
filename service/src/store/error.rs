//! Why a store operation failed. Messages never carry the database URL, credentials or row
//! contents beyond the offending field's name; `service/src/error.rs` maps them to gRPC codes.

/// Which calibration table a version check failed on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CalibrationKind {
    /// A vehicle's own calibration.
    Vehicle,
    /// An archetype pool shared by the fleet's vehicles of that archetype.
    Archetype,
}

impl std::fmt::Display for CalibrationKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Self::Vehicle => "vehicle",
            Self::Archetype => "archetype",
        })
    }
}

/// Why a store operation failed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum StoreError {
    /// An argument breaks a cap or holds a value that must not be stored (NaN, infinity, an
    /// empty or oversized id, too many items). Nothing was written.
    #[error("{field}: {reason}")]
    InvalidArgument {
        /// The argument's path, e.g. `batch.attempts[3].cranking_s` or `tenant`.
        field: String,
        /// What is wrong and what would be right.
        reason: String,
    },
    /// A calibration changed since the caller loaded it (another replica or call wrote it):
    /// the whole batch was rolled back; reload, recompute and commit again.
    #[error("{0}; nothing was written")]
    Concurrent(String),
    /// The database cannot be reached or is too busy (connection lost, pool timed out, lock
    /// wait timed out); the operation may be retried. For `commit`, nothing was written or the
    /// batch was fully written: a retry is idempotent.
    #[error("the store is unavailable: {0}")]
    Unavailable(String),
    /// The store configuration cannot be used (bad URL, unusable path).
    #[error("store configuration: {0}")]
    Config(String),
    /// The database schema is newer than this build or a migration was changed after it ran.
    #[error("store schema: {0}")]
    Schema(String),
    /// A defect or an unexpected database error.
    #[error("store internal error: {0}")]
    Internal(String),
}

impl StoreError {
    /// A version mismatch on one calibration.
    pub(crate) fn concurrent(kind: CalibrationKind, id: &str) -> Self {
        Self::Concurrent(format!(
            "the {kind} calibration {id:?} changed since it was loaded"
        ))
    }

    /// An invalid argument at `field`.
    pub(crate) fn invalid(field: impl Into<String>, reason: impl Into<String>) -> Self {
        Self::InvalidArgument {
            field: field.into(),
            reason: reason.into(),
        }
    }
}

/// SQLSTATE codes after which a PostgreSQL transaction is safe to retry from scratch
/// (serialization failure, deadlock): the caller reloads, as after a version mismatch.
const PG_RETRY_STATES: [&str; 2] = ["40001", "40P01"];

impl From<sqlx::Error> for StoreError {
    fn from(e: sqlx::Error) -> Self {
        use sqlx::Error as E;
        match e {
            E::PoolTimedOut => {
                Self::Unavailable("no database connection within the timeout".into())
            }
            E::PoolClosed => Self::Unavailable("the store is closed".into()),
            E::Io(io) => Self::Unavailable(format!("database connection failed ({})", io.kind())),
            E::Tls(_) => Self::Unavailable("database TLS failed".into()),
            E::Protocol(_) => Self::Unavailable("database protocol error".into()),
            E::WorkerCrashed => Self::Unavailable("the SQLite worker stopped".into()),
            E::Configuration(c) => Self::Config(c.to_string()),
            E::Database(db) => {
                let code = db.code().map(|c| c.into_owned()).unwrap_or_default();
                if PG_RETRY_STATES.contains(&code.as_str()) {
                    return Self::Concurrent(format!(
                        "a concurrent transaction collided with this one (SQLSTATE {code})"
                    ));
                }
                // SQLite: SQLITE_BUSY (5) and SQLITE_LOCKED (6), with extended codes.
                if let Ok(n) = code.parse::<i64>()
                    && matches!(n & 0xff, 5 | 6)
                {
                    return Self::Unavailable("the database stayed locked past the timeout".into());
                }
                // PostgreSQL: connection exceptions (08…), shutdown (57P…), too many connections.
                if code.starts_with("08") || code.starts_with("57P") || code == "53300" {
                    return Self::Unavailable(format!("database unavailable (SQLSTATE {code})"));
                }
                Self::Internal(format!("database error {code}: {}", db.message()))
            }
            E::RowNotFound => Self::Internal("an expected row is missing".into()),
            E::ColumnNotFound(c) => Self::Internal(format!("column {c} missing")),
            E::ColumnDecode { index, .. } => Self::Internal(format!("column {index} undecodable")),
            E::Decode(_) => Self::Internal("a stored value is undecodable".into()),
            other => Self::Internal(format!("database error: {}", error_kind(&other))),
        }
    }
}

/// A short, secret-free name of an error we do not map specially.
fn error_kind(e: &sqlx::Error) -> &'static str {
    match e {
        sqlx::Error::TypeNotFound { .. } => "type not found",
        sqlx::Error::ColumnIndexOutOfBounds { .. } => "column index out of bounds",
        sqlx::Error::AnyDriverError(_) => "driver error",
        sqlx::Error::Encode(_) => "value not encodable",
        sqlx::Error::InvalidArgument(_) => "invalid driver argument",
        _ => "unexpected",
    }
}
