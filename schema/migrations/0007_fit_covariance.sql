-- 0007: the fit's covariance matrix, so every figure served from a stored fit
-- (Vf, rd at a current) carries a standard error propagated from it.
--
-- covariance: JSON array of rows, in the order of detail.parameter_names, SI
-- units (A², Ω², …), null for an entry not determined; as fitting::FitResult
-- .covariance (already scaled by the reduced chi-square). NULL on rows written
-- before this migration: the store rebuilds it from the stored correlation
-- and standard errors (daemon/store.cpp, covariance_from_correlation).
ALTER TABLE fits ADD COLUMN covariance TEXT;
