-- Recording a release of a million items spent most of its time in the
-- per-row foreign-key check of release_items.item_id (one index probe and
-- one row lock on items per released item). The same guarantee is kept by
-- other means:
--   * on insert, CreateRelease copies the items into a staging table and
--     moves them with one INSERT ... SELECT joined to items of the release's
--     project, failing the release if any named item is missing, so a
--     release never names an item it does not own (stricter than the old
--     key, which accepted items of other projects);
--   * on delete, the statement trigger below refuses to delete items that
--     a release still names, as the old key did. Items are only ever
--     deleted with their project, whose releases cascade first.
-- release_items_item_idx served only that key's delete check; the trigger
-- looks items up through the project's releases (the primary key's
-- release_id prefix) instead.
ALTER TABLE release_items DROP CONSTRAINT release_items_item_id_fkey;
DROP INDEX release_items_item_idx;
COMMENT ON COLUMN release_items.item_id IS
    'An item of the release''s project. Not a foreign key, for speed: CreateRelease inserts only items joined to items of the project, and trigger items_keep_released refuses to delete an item a release names.';

CREATE FUNCTION forbid_released_item_delete() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    -- Lock the projects so that a release being recorded concurrently
    -- (which holds a key-share lock on its project through releases'
    -- foreign key) commits first and is seen by the check below.
    PERFORM 1 FROM projects WHERE id IN (SELECT DISTINCT project_id FROM gone) FOR UPDATE;
    IF EXISTS (
        SELECT 1
        FROM releases r
        JOIN release_items ri ON ri.release_id = r.id
        JOIN gone g ON g.id = ri.item_id AND g.project_id = r.project_id
        WHERE r.project_id IN (SELECT DISTINCT project_id FROM gone)
    ) THEN
        RAISE EXCEPTION 'items named by a release cannot be deleted'
            USING ERRCODE = 'foreign_key_violation', CONSTRAINT = 'items_keep_released';
    END IF;
    RETURN NULL;
END $$;
CREATE TRIGGER items_keep_released AFTER DELETE ON items REFERENCING OLD TABLE AS gone
    FOR EACH STATEMENT EXECUTE FUNCTION forbid_released_item_delete();
COMMENT ON TRIGGER items_keep_released ON items IS
    'Stands in for a foreign key from release_items.item_id: a released item stays as long as its release.';
