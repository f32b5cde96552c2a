DROP TRIGGER IF EXISTS items_keep_released ON items;
DROP FUNCTION IF EXISTS forbid_released_item_delete();
COMMENT ON COLUMN release_items.item_id IS NULL;
CREATE INDEX release_items_item_idx ON release_items (item_id);
ALTER TABLE release_items ADD CONSTRAINT release_items_item_id_fkey FOREIGN KEY (item_id) REFERENCES items (id);
