//! The store suite against SQLite: each test opens a fresh database file in a temporary
//! directory.

mod store_suite;

use startmargin_service::store::{Store, StoreConfig};

/// A temporary directory removed when dropped.
struct TempDir(std::path::PathBuf);

impl TempDir {
    fn new(name: &str) -> Self {
        let dir = std::env::temp_dir().join(format!(
            "startmargin-store-{name}-{}-{}",
            std::process::id(),
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map_or(0, |d| d.as_nanos())
        ));
        std::fs::create_dir_all(&dir).expect("temp dir");
        Self(dir)
    }

    fn config(&self) -> StoreConfig {
        StoreConfig {
            url: format!("sqlite://{}", self.0.join("sub/starts.db").display()),
            ..StoreConfig::default()
        }
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

async fn open(dir: &TempDir) -> Store {
    Store::open(&dir.config()).await.expect("open")
}

/// Runs one suite function on a store in a fresh temporary directory.
macro_rules! suite_test {
    ($name:ident) => {
        #[tokio::test]
        async fn $name() {
            let dir = TempDir::new(stringify!($name));
            store_suite::$name(open(&dir).await).await;
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
    let dir = TempDir::new("concurrent");
    store_suite::concurrent_commits(open(&dir).await, open(&dir).await).await;
}

#[tokio::test]
async fn migrations() {
    let (fresh, older) = (TempDir::new("fresh"), TempDir::new("older"));
    store_suite::migrations(fresh.config(), older.config()).await;
}

#[tokio::test]
async fn default_url_is_a_relative_file_created_on_first_use() {
    let dir = TempDir::new("default");
    let config = StoreConfig::default();
    let relative = config
        .url
        .strip_prefix("sqlite://")
        .expect("an SQLite default");
    assert!(
        !relative.starts_with('/'),
        "relative to the working directory"
    );
    let at = StoreConfig {
        url: format!("sqlite://{}", dir.0.join(relative).display()),
        ..config
    };
    let store = Store::open(&at)
        .await
        .expect("open creates directory and file");
    assert!(dir.0.join(relative).is_file());
    assert_eq!(store.backend(), startmargin_service::store::Backend::Sqlite);
}
