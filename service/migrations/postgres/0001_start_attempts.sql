-- Observed start attempts, one row per vehicle and attempt time within a tenant.
CREATE TABLE start_attempts (
    tenant_id TEXT NOT NULL,
    vehicle_id TEXT NOT NULL,
    attempted_at_ms BIGINT NOT NULL,
    archetype_id TEXT NOT NULL,
    outcome TEXT NOT NULL CHECK (outcome IN ('fired', 'fired_after_retries', 'did_not_fire')),
    cranking_s DOUBLE PRECISION NOT NULL,
    peak_cranking_rpm DOUBLE PRECISION,
    lowest_cranking_v DOUBLE PRECISION,
    air_c DOUBLE PRECISION NOT NULL,
    coolant_c DOUBLE PRECISION,
    preheat_s DOUBLE PRECISION NOT NULL,
    block_heater_on BOOLEAN NOT NULL,
    predicted_no_start_probability DOUBLE PRECISION NOT NULL,
    uncalibrated_no_start_probability DOUBLE PRECISION NOT NULL,
    predicted_margin_k DOUBLE PRECISION NOT NULL,
    calibrated_observations BIGINT NOT NULL,
    received_at_ms BIGINT NOT NULL,
    PRIMARY KEY (tenant_id, vehicle_id, attempted_at_ms)
);

-- The fleet read-out scans a tenant's attempts by time.
CREATE INDEX start_attempts_by_time ON start_attempts (tenant_id, attempted_at_ms);
