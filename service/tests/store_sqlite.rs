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

#[tokio::test]
async fn round_trip() {
    let dir = TempDir::new("round-trip");
    store_suite::round_trip(open(&dir).await).await;
}
