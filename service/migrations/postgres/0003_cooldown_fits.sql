-- Cool-down time constants fitted from coolant readings after a key-off, one row per vehicle
-- and key-off: a replayed cool-down is recognised and not learned from twice.
CREATE TABLE cooldown_fits (
    tenant_id TEXT NOT NULL,
    vehicle_id TEXT NOT NULL,
    keyed_off_at_ms BIGINT NOT NULL,
    time_constant_s DOUBLE PRECISION NOT NULL,
    readings BIGINT NOT NULL,
    recorded_at_ms BIGINT NOT NULL,
    PRIMARY KEY (tenant_id, vehicle_id, keyed_off_at_ms)
);
