-- Piles by cap: a record save reads its cap-mates (their as-built positions for the cap's
-- shares, and a recheck when its own position moves). Without this index each read scanned
-- every pile of the database.
CREATE INDEX IF NOT EXISTS piles_cap ON piles(cap_id);
