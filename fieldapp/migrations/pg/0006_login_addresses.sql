-- PostgreSQL variant of 0006_login_addresses.sql: the same tables, columns, keys and checks; ids are
-- identity columns (BIGINT), REAL is DOUBLE PRECISION, references to ids are BIGINT.
-- The addresses each user has signed in from successfully. A correct password from one of them
-- passes the per-address limit on failed logins (fieldapp.auth.login): someone else's failures
-- from a shared site network cannot lock out the engineers who work there.
CREATE TABLE login_addresses (
    user_id BIGINT NOT NULL REFERENCES users(id) ON DELETE CASCADE,
    ip TEXT NOT NULL,
    first_at DOUBLE PRECISION NOT NULL,
    last_at DOUBLE PRECISION NOT NULL,
    PRIMARY KEY (user_id, ip)
);
