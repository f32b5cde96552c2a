ALTER TABLE releases
    DROP COLUMN taxonomy,
    DROP COLUMN release_json;
