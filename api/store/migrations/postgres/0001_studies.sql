-- Study records: studies, their tags, revisions (0 is the study as saved)
-- and signatures. Records are never changed or deleted; the triggers refuse
-- it.
CREATE TABLE studies (
	id           text PRIMARY KEY,
	kind         text NOT NULL,
	label        text NOT NULL,
	created      timestamptz NOT NULL,
	who          text NOT NULL,
	input        bytea NOT NULL,
	content_type text NOT NULL,
	query        text NOT NULL,
	input_sha256 bytea NOT NULL,
	options      bytea NOT NULL,
	seed         bigint NOT NULL,
	version      text NOT NULL,
	vcs_revision text NOT NULL,
	result       bytea NOT NULL
);
CREATE INDEX studies_created ON studies (created DESC, id DESC);
CREATE INDEX studies_kind ON studies (kind, created DESC, id DESC);
CREATE INDEX studies_label ON studies (label, created DESC, id DESC);

CREATE TABLE study_tags (
	study_id text NOT NULL REFERENCES studies (id),
	key      text NOT NULL,
	value    text NOT NULL,
	created  timestamptz NOT NULL, -- the study's, so that a tag's index lists newest first
	PRIMARY KEY (study_id, key)
);
CREATE INDEX study_tags_pair ON study_tags (key, value, created DESC, study_id DESC);

CREATE TABLE revisions (
	study_id  text NOT NULL REFERENCES studies (id),
	number    integer NOT NULL,
	based_on  integer NOT NULL,
	reason    text NOT NULL,
	who       text NOT NULL,
	at        timestamptz NOT NULL,
	change    bytea NOT NULL,
	result    bytea, -- NULL for revision 0: the study's result
	prev_hash bytea NOT NULL,
	hash      bytea NOT NULL,
	PRIMARY KEY (study_id, number)
);

CREATE TABLE signatures (
	study_id      text NOT NULL,
	revision      integer NOT NULL,
	meaning       text NOT NULL,
	signer        text NOT NULL,
	at            timestamptz NOT NULL,
	comment       text NOT NULL,
	revision_hash bytea NOT NULL,
	PRIMARY KEY (study_id, revision, meaning, signer),
	FOREIGN KEY (study_id, revision) REFERENCES revisions (study_id, number)
);

CREATE FUNCTION eivfit_keep_records() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
	RAISE EXCEPTION 'study records are never changed or deleted';
END $$;
CREATE TRIGGER studies_keep BEFORE UPDATE OR DELETE ON studies FOR EACH ROW EXECUTE FUNCTION eivfit_keep_records();
CREATE TRIGGER study_tags_keep BEFORE UPDATE OR DELETE ON study_tags FOR EACH ROW EXECUTE FUNCTION eivfit_keep_records();
CREATE TRIGGER revisions_keep BEFORE UPDATE OR DELETE ON revisions FOR EACH ROW EXECUTE FUNCTION eivfit_keep_records();
CREATE TRIGGER signatures_keep BEFORE UPDATE OR DELETE ON signatures FOR EACH ROW EXECUTE FUNCTION eivfit_keep_records();
