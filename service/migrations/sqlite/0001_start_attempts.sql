-- Observed start attempts, one row per vehicle and attempt time within a tenant.
CREATE TABLE start_attempts (
    tenant_id TEXT NOT NULL,
    vehicle_id TEXT NOT NULL,
    attempted_at_ms INTEGER NOT NULL,
    archetype_id TEXT NOT NULL,
    outcome TEXT NOT NULL CHECK (outcome IN ('fired', 'fired_after_retries', 'did_not_fire')),
    cranking_s REAL NOT NULL,
    peak_cranking_rpm REAL,
    lowest_cranking_v REAL,
    air_c REAL NOT NULL,
    coolant_c REAL,
    preheat_s REAL NOT NULL,
    block_heater_on INTEGER NOT NULL CHECK (block_heater_on IN (0, 1)),
    predicted_no_start_probability REAL NOT NULL,
    uncalibrated_no_start_probability REAL NOT NULL,
    predicted_margin_k REAL NOT NULL,
    calibrated_observations INTEGER NOT NULL,
    received_at_ms INTEGER NOT NULL,
    PRIMARY KEY (tenant_id, vehicle_id, attempted_at_ms)
) STRICT;

-- The fleet read-out scans a tenant's attempts by time.
CREATE INDEX start_attempts_by_time ON start_attempts (tenant_id, attempted_at_ms);
