-- Import keeps a thumbnail per item as a blob of its own, so the lead and
-- labeller pages fetch a small JPEG instead of the original.
ALTER TABLE items ADD COLUMN thumb_key text CHECK (thumb_key IS NULL OR thumb_key ~ '^[0-9a-f]{64}$');
COMMENT ON COLUMN items.file_key IS 'Blob key (lower-case hex SHA-256) of the original bytes.';
COMMENT ON COLUMN items.thumb_key IS 'Blob key of the item''s JPEG thumbnail (at most 256 px a side); NULL for items imported before thumbnails.';
COMMENT ON COLUMN items.group_key IS 'Manifest group: items of one group always share a release split.';

-- A release can be downloaded again later in the formats it was cut with.
ALTER TABLE releases ADD COLUMN formats text NOT NULL DEFAULT 'jsonl';
COMMENT ON COLUMN releases.formats IS 'Comma-separated outputs the release was written with (jsonl, csv, folders).';
