-- The addresses each user has signed in from successfully. A correct password from one of them
-- passes the per-address limit on failed logins (fieldapp.auth.login): someone else's failures
-- from a shared site network cannot lock out the engineers who work there.
CREATE TABLE login_addresses (
    user_id INTEGER NOT NULL REFERENCES users(id) ON DELETE CASCADE,
    ip TEXT NOT NULL,
    first_at REAL NOT NULL,
    last_at REAL NOT NULL,
    PRIMARY KEY (user_id, ip)
);
