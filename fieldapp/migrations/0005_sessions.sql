-- Sign-ins kept on the server, so that signing out ends a session for good and the sessions of
-- a lost tablet can be ended from the server (toeline user end-sessions). The browser's signed
-- cookie carries only a random token; its SHA-256 is stored here, never the token itself.
CREATE TABLE sessions (
    id INTEGER PRIMARY KEY,
    user_id INTEGER NOT NULL REFERENCES users(id) ON DELETE CASCADE,
    token_hash TEXT NOT NULL UNIQUE,
    started_at REAL NOT NULL,
    ended_at REAL
);
CREATE INDEX sessions_user ON sessions(user_id);

-- Failed logins counted by address too: one address trying many emails is slowed down as well.
ALTER TABLE login_failures ADD COLUMN ip TEXT NOT NULL DEFAULT '';
CREATE INDEX login_failures_ip ON login_failures(ip, at);
