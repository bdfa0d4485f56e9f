//! The store suite against PostgreSQL, at `TEST_POSTGRES_URL_FOR_STARTMARGIN` (`.ci/run` starts a
//! throwaway cluster and sets it; `. .ci/postgres.sh && start_test_postgres` does the same by
//! hand). Tenant ids are unique per test, so tests share the database without cleaning it.
//! Without the variable the tests fail under CI (`CI` set) and otherwise print a loud line
//! and return.

mod store_suite;

use startmargin_service::store::{Store, StoreConfig};

/// The test database's configuration, or `None` (after saying so) when there is none.
fn config() -> Option<StoreConfig> {
    match std::env::var("TEST_POSTGRES_URL_FOR_STARTMARGIN") {
        Ok(url) if !url.is_empty() => Some(StoreConfig {
            url,
            max_connections: 4,
            ..StoreConfig::default()
        }),
        _ => {
            assert!(
                std::env::var_os("CI").is_none(),
                "TEST_POSTGRES_URL_FOR_STARTMARGIN is not set under CI: .ci/run starts PostgreSQL"
            );
            eprintln!(
                "PostgreSQL tests not run: TEST_POSTGRES_URL_FOR_STARTMARGIN is not set. Install the \
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

/// Runs one suite function on the shared test database.
macro_rules! suite_test {
    ($name:ident) => {
        #[tokio::test]
        async fn $name() {
            if let Some(store) = open().await {
                store_suite::$name(store).await;
            }
        }
    };
}

suite_test!(round_trip);
suite_test!(idempotent_duplicates);
suite_test!(conflicts);
suite_test!(version_check);
suite_test!(tenant_isolation);
suite_test!(limits);
suite_test!(hostile_values);
suite_test!(cooldown_fits);

#[tokio::test]
async fn concurrent_commits() {
    if let Some(config) = config() {
        let first = Store::open(&config).await.expect("first handle");
        let second = Store::open(&config).await.expect("second handle");
        store_suite::concurrent_commits(first, second).await;
    }
}

/// A new empty database beside the test database, dropped when this is dropped.
struct FreshDatabase {
    admin: sqlx::PgPool,
    name: String,
    config: StoreConfig,
}

impl FreshDatabase {
    async fn create(base: &StoreConfig, label: &str) -> Self {
        let admin = sqlx::PgPool::connect(&base.url)
            .await
            .expect("admin connection");
        let name = format!("startmargin_{label}_{}", std::process::id());
        sqlx::raw_sql(&format!("DROP DATABASE IF EXISTS {name} WITH (FORCE)"))
            .execute(&admin)
            .await
            .expect("drop a leftover");
        sqlx::raw_sql(&format!("CREATE DATABASE {name}"))
            .execute(&admin)
            .await
            .expect("create database");
        let (head, tail) = base.url.rsplit_once('/').expect("a database in the URL");
        let query = tail.find('?').map_or("", |i| &tail[i..]);
        let config = StoreConfig {
            url: format!("{head}/{name}{query}"),
            ..base.clone()
        };
        Self {
            admin,
            name,
            config,
        }
    }

    async fn drop_now(self) {
        sqlx::raw_sql(&format!(
            "DROP DATABASE IF EXISTS {} WITH (FORCE)",
            self.name
        ))
        .execute(&self.admin)
        .await
        .expect("drop database");
    }
}

#[tokio::test]
async fn migrations() {
    if let Some(base) = config() {
        let fresh = FreshDatabase::create(&base, "fresh").await;
        let older = FreshDatabase::create(&base, "older").await;
        store_suite::migrations(fresh.config.clone(), older.config.clone()).await;
        fresh.drop_now().await;
        older.drop_now().await;
    }
}
