//! Versioned schema migrations, one SQL file per version and back-end under
//! `service/migrations/`, embedded in the binary and applied at open inside one locked
//! transaction (SQLite `BEGIN IMMEDIATE`; PostgreSQL a transaction-scoped advisory lock), so
//! that replicas starting together apply each version once. A table `startmargin_schema`
//! records each applied version with a checksum of its SQL: opening is idempotent, a database
//! newer than this build or a migration edited after it ran is refused.

/// One schema version.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Migration {
    /// Version number, from 1, consecutive.
    pub version: i64,
    /// Short name (the file name without version and extension).
    pub name: &'static str,
    /// The SQL applied, one or more statements.
    pub sql: &'static str,
}

/// The SQLite migrations, oldest first.
pub const SQLITE_MIGRATIONS: &[Migration] = &[
    Migration {
        version: 1,
        name: "start_attempts",
        sql: include_str!("../../migrations/sqlite/0001_start_attempts.sql"),
    },
    Migration {
        version: 2,
        name: "calibrations",
        sql: include_str!("../../migrations/sqlite/0002_calibrations.sql"),
    },
    Migration {
        version: 3,
        name: "cooldown_fits",
        sql: include_str!("../../migrations/sqlite/0003_cooldown_fits.sql"),
    },
];

/// The PostgreSQL migrations, oldest first (the same versions as SQLite's).
pub const POSTGRES_MIGRATIONS: &[Migration] = &[
    Migration {
        version: 1,
        name: "start_attempts",
        sql: include_str!("../../migrations/postgres/0001_start_attempts.sql"),
    },
    Migration {
        version: 2,
        name: "calibrations",
        sql: include_str!("../../migrations/postgres/0002_calibrations.sql"),
    },
    Migration {
        version: 3,
        name: "cooldown_fits",
        sql: include_str!("../../migrations/postgres/0003_cooldown_fits.sql"),
    },
];

/// The newest schema version this build knows.
pub const LATEST_SCHEMA_VERSION: i64 = 3;

/// The bookkeeping table (the same DDL suits both back-ends).
pub(crate) const SCHEMA_TABLE_DDL: &str = "CREATE TABLE IF NOT EXISTS startmargin_schema (\
     version BIGINT PRIMARY KEY, name TEXT NOT NULL, checksum TEXT NOT NULL, \
     applied_at_ms BIGINT NOT NULL)";

/// Key of the PostgreSQL advisory lock held while migrating (an arbitrary fixed number).
pub(crate) const PG_MIGRATION_LOCK_KEY: i64 = 0x5354_4d52_4731; // "STMRG1"

/// Checksum of a migration's SQL (64-bit FNV-1a, hex): detects a file edited after it ran.
pub(crate) fn checksum(sql: &str) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in sql.bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    format!("{h:016x}")
}

/// Which of `migrations` to apply to a database that has `applied` (version, checksum) rows,
/// up to `target`; refuses an unknown or altered applied version.
pub(crate) fn plan<'m>(
    migrations: &'m [Migration],
    applied: &[(i64, String)],
    target: i64,
) -> Result<Vec<&'m Migration>, super::StoreError> {
    use super::StoreError;
    for (version, sum) in applied {
        match migrations.iter().find(|m| m.version == *version) {
            None => {
                return Err(StoreError::Schema(format!(
                    "the database has schema version {version}, newer than this build \
                     (it knows up to {LATEST_SCHEMA_VERSION}); run a newer startmargind"
                )));
            }
            Some(m) if checksum(m.sql) != *sum => {
                return Err(StoreError::Schema(format!(
                    "migration {} ({}) differs from the one applied to this database",
                    m.version, m.name
                )));
            }
            Some(_) => {}
        }
    }
    let done = applied.iter().map(|(v, _)| *v).max().unwrap_or(0);
    Ok(migrations
        .iter()
        .filter(|m| m.version > done && m.version <= target)
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn versions_are_consecutive_and_match_between_back_ends() {
        for list in [SQLITE_MIGRATIONS, POSTGRES_MIGRATIONS] {
            for (i, m) in list.iter().enumerate() {
                assert_eq!(m.version, i as i64 + 1);
            }
            assert_eq!(list.last().map(|m| m.version), Some(LATEST_SCHEMA_VERSION));
        }
        let names = |l: &[Migration]| l.iter().map(|m| m.name).collect::<Vec<_>>();
        assert_eq!(names(SQLITE_MIGRATIONS), names(POSTGRES_MIGRATIONS));
    }

    #[test]
    fn plan_skips_applied_and_refuses_unknown_or_altered() {
        let m = SQLITE_MIGRATIONS;
        let one = vec![(1, checksum(m[0].sql))];
        let todo = plan(m, &one, LATEST_SCHEMA_VERSION).expect("plan");
        assert_eq!(todo.iter().map(|m| m.version).collect::<Vec<_>>(), [2, 3]);
        assert!(plan(m, &[(1, "0".into())], 2).is_err());
        assert!(plan(m, &[(99, "0".into())], 2).is_err());
        assert_eq!(plan(m, &[], 1).expect("plan").len(), 1);
    }
}
