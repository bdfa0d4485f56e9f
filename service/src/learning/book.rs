//! The calibration book: each tenant's vehicle calibrations and archetype pools held in memory, so
//! that an assessment looks its vehicle up without a database round trip. A tenant's book is
//! loaded from the store on its first use and reloaded when older than the refresh interval
//! (other replicas' reports become visible within it); this replica's own reports update it at
//! once.

use std::collections::HashMap;
use std::sync::{Arc, RwLock};
use std::time::{Duration, Instant};

use startmargin_model::learning::VehicleCalibration;

use super::ingest::States;

/// Where an assessment's calibration came from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Looked {
    /// The calibration to assess with.
    pub calibration: VehicleCalibration,
    /// Attempts of the archetype across the tenant's fleet behind the pooled prior.
    pub pooled_observations: u32,
}

#[derive(Debug)]
struct TenantBook {
    states: Arc<States>,
    loaded_at: Instant,
}

/// Every tenant's calibrations, in memory.
#[derive(Debug)]
pub struct CalibrationBook {
    tenants: RwLock<HashMap<String, TenantBook>>,
    refresh: Duration,
}

impl CalibrationBook {
    /// An empty book whose tenants are reloaded after `refresh`.
    pub fn new(refresh: Duration) -> Self {
        Self {
            tenants: RwLock::new(HashMap::new()),
            refresh,
        }
    }

    /// Whether `tenant` must be (re)loaded before it is read.
    pub fn needs_load(&self, tenant: &str) -> bool {
        let tenants = self.tenants.read().unwrap_or_else(|e| e.into_inner());
        tenants
            .get(tenant)
            .is_none_or(|b| b.loaded_at.elapsed() >= self.refresh)
    }

    /// Replaces `tenant`'s book with states just loaded from the store.
    pub fn install(&self, tenant: &str, states: States) {
        let mut tenants = self.tenants.write().unwrap_or_else(|e| e.into_inner());
        tenants.insert(
            tenant.to_string(),
            TenantBook {
                states: Arc::new(states),
                loaded_at: Instant::now(),
            },
        );
    }

    /// Applies this replica's own committed updates to `tenant`'s book.
    pub fn apply(&self, tenant: &str, updated: &States) {
        let mut tenants = self.tenants.write().unwrap_or_else(|e| e.into_inner());
        let book = tenants
            .entry(tenant.to_string())
            .or_insert_with(|| TenantBook {
                states: Arc::new(States::default()),
                // Never loaded: the next read loads the whole tenant first.
                loaded_at: Instant::now() - self.refresh,
            });
        let states = Arc::make_mut(&mut book.states);
        states
            .vehicles
            .extend(updated.vehicles.iter().map(|(k, v)| (k.clone(), *v)));
        states
            .pools
            .extend(updated.pools.iter().map(|(k, v)| (k.clone(), *v)));
    }

    /// The states of `tenant` as held (empty when never loaded).
    pub fn states(&self, tenant: &str) -> Arc<States> {
        let tenants = self.tenants.read().unwrap_or_else(|e| e.into_inner());
        tenants
            .get(tenant)
            .map_or_else(|| Arc::new(States::default()), |b| Arc::clone(&b.states))
    }

    /// The calibration to assess `vehicle_id` with: its own, else its archetype's pooled prior;
    /// `None` when the tenant has taught nothing about either.
    pub fn lookup(&self, tenant: &str, vehicle_id: &str, archetype_id: &str) -> Option<Looked> {
        let states = self.states(tenant);
        let pool = states.pools.get(archetype_id);
        if !states.vehicles.contains_key(vehicle_id) && pool.is_none() {
            return None;
        }
        Some(Looked {
            calibration: states.prior_of(vehicle_id, archetype_id),
            pooled_observations: pool.map_or(0, |p| p.observations),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn own_updates_show_at_once_and_unknown_tenants_need_a_load() {
        let book = CalibrationBook::new(Duration::from_secs(60));
        assert!(book.needs_load("a"));
        assert_eq!(book.lookup("a", "v1", "heavy-di-i6"), None);
        book.install("a", States::default());
        assert!(!book.needs_load("a"));
        let mut updated = States::default();
        let mut c = VehicleCalibration::uncalibrated();
        c.observations = 3;
        updated.vehicles.insert("v1".into(), c);
        updated.pools.insert("heavy-di-i6".into(), c);
        book.apply("a", &updated);
        let own = book.lookup("a", "v1", "heavy-di-i6").unwrap();
        assert_eq!(own.calibration.observations, 3);
        assert_eq!(own.pooled_observations, 3);
        // Another vehicle of the archetype gets the pooled prior; another tenant sees nothing.
        assert!(book.lookup("a", "v2", "heavy-di-i6").is_some());
        assert_eq!(book.lookup("b", "v1", "heavy-di-i6"), None);
        // A tenant updated before it was ever loaded still loads fully on its next read.
        book.apply("c", &updated);
        assert!(book.needs_load("c"));
    }
}
