-- Calibration state per vehicle and per archetype pool, versioned for optimistic concurrency.
CREATE TABLE vehicle_calibrations (
    tenant_id TEXT NOT NULL,
    vehicle_id TEXT NOT NULL,
    thermal_offset_mean_k REAL NOT NULL,
    thermal_offset_sd_k REAL NOT NULL,
    cranking_log_factor_mean REAL NOT NULL,
    cranking_log_factor_sd REAL NOT NULL,
    cooldown_tau_mean_s REAL,
    cooldown_tau_sd_s REAL,
    observations INTEGER NOT NULL,
    updated_at_ms INTEGER NOT NULL,
    version INTEGER NOT NULL,
    PRIMARY KEY (tenant_id, vehicle_id)
) STRICT;

CREATE TABLE archetype_calibrations (
    tenant_id TEXT NOT NULL,
    archetype_id TEXT NOT NULL,
    thermal_offset_mean_k REAL NOT NULL,
    thermal_offset_sd_k REAL NOT NULL,
    cranking_log_factor_mean REAL NOT NULL,
    cranking_log_factor_sd REAL NOT NULL,
    cooldown_tau_mean_s REAL,
    cooldown_tau_sd_s REAL,
    observations INTEGER NOT NULL,
    updated_at_ms INTEGER NOT NULL,
    version INTEGER NOT NULL,
    PRIMARY KEY (tenant_id, archetype_id)
) STRICT;
