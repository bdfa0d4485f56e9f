-- Calibration state per vehicle and per archetype pool, versioned for optimistic concurrency.
CREATE TABLE vehicle_calibrations (
    tenant_id TEXT NOT NULL,
    vehicle_id TEXT NOT NULL,
    thermal_offset_mean_k DOUBLE PRECISION NOT NULL,
    thermal_offset_sd_k DOUBLE PRECISION NOT NULL,
    cranking_log_factor_mean DOUBLE PRECISION NOT NULL,
    cranking_log_factor_sd DOUBLE PRECISION NOT NULL,
    cooldown_tau_mean_s DOUBLE PRECISION,
    cooldown_tau_sd_s DOUBLE PRECISION,
    observations BIGINT NOT NULL,
    updated_at_ms BIGINT NOT NULL,
    version BIGINT NOT NULL,
    PRIMARY KEY (tenant_id, vehicle_id)
);

CREATE TABLE archetype_calibrations (
    tenant_id TEXT NOT NULL,
    archetype_id TEXT NOT NULL,
    thermal_offset_mean_k DOUBLE PRECISION NOT NULL,
    thermal_offset_sd_k DOUBLE PRECISION NOT NULL,
    cranking_log_factor_mean DOUBLE PRECISION NOT NULL,
    cranking_log_factor_sd DOUBLE PRECISION NOT NULL,
    cooldown_tau_mean_s DOUBLE PRECISION,
    cooldown_tau_sd_s DOUBLE PRECISION,
    observations BIGINT NOT NULL,
    updated_at_ms BIGINT NOT NULL,
    version BIGINT NOT NULL,
    PRIMARY KEY (tenant_id, archetype_id)
);
