//! The store suite against PostgreSQL, at `STARTMARGIN_TEST_POSTGRES_URL` (`.ci/run` starts a
//! throwaway cluster and sets it; `. .ci/postgres.sh && start_test_postgres` does the same by
//! hand). Tenant ids are unique per test, so tests share the database without cleaning it.
//! Without the variable the tests fail under CI (`CI` set) and otherwise print a loud line
//! and return.

mod store_suite;

use startmargin_service::store::{Store, StoreConfig};

/// The test database's configuration, or `None` (after saying so) when there is none.
fn config() -> Option<StoreConfig> {
    match std::env::var("STARTMARGIN_TEST_POSTGRES_URL") {
        Ok(url) if !url.is_empty() => Some(StoreConfig {
            url,
            max_connections: 4,
            ..StoreConfig::default()
        }),
        _ => {
            assert!(
                std::env::var_os("CI").is_none(),
                "STARTMARGIN_TEST_POSTGRES_URL is not set under CI: .ci/run starts PostgreSQL"
            );
            eprintln!(
                "PostgreSQL tests not run: STARTMARGIN_TEST_POSTGRES_URL is not set. Install the \
                 postgresql package (apt-get install postgresql), then run \
                 `. .ci/postgres.sh && start_test_postgres` before cargo test."
            );
            None
        }
    }
}

async fn open() -> Option<Store> {
    let config = config()?;
    Some(
        Store::open(&config)
            .await
            .expect("open the PostgreSQL test database"),
    )
}

#[tokio::test]
async fn round_trip() {
    if let Some(store) = open().await {
        store_suite::round_trip(store).await;
    }
}
