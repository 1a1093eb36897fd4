-- An override the signer states and signs with a signature (e.g. approving a model version whose
-- endpoint rule reached done before the known endpoint on reference batches). NULL: none.
ALTER TABLE auth_signatures ADD COLUMN override TEXT;
