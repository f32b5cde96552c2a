-- A release rebuilt for re-download used to read its taxonomy back out of
-- its CARD.md text and to rebuild release.json from the record alone, which
-- lacked the vote policy, agreement figures and cost. Keeping the exact
-- release.json and the taxonomy it was cut with makes every file of a
-- rebuilt release byte-identical to the first issue. Releases recorded
-- before this migration keep NULL and are rebuilt as before.
ALTER TABLE releases
    ADD COLUMN release_json text,
    ADD COLUMN taxonomy     jsonb CHECK (jsonb_typeof(taxonomy) = 'array');
COMMENT ON COLUMN releases.release_json IS 'The exact bytes of the release''s release.json as first issued; NULL for releases recorded before migration 0005.';
COMMENT ON COLUMN releases.taxonomy IS 'The project''s taxonomy when the release was cut, in the taxonomy package''s JSON form (nested {"key", "name", "children"}, children in order); NULL for releases recorded before migration 0005.';
