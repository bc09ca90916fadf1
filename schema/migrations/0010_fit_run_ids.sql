-- 0010: every fit names the run it was made from. Rows written before juncod
-- recorded it have run_id NULL, so part.fit, part.figures and part.readings
-- could not say which readings a fit used (and plots of such a part could not
-- mark the readings the fit left out).
--
-- A fit is made when its run ends, so its run is the part's latest run that
-- started no later than the fit was stored (started_at and created_at are
-- both ISO 8601 UTC text, which sorts in time order). A fit older than every
-- run of its part keeps NULL: nothing says which run it came from.
UPDATE fits SET run_id = (
  SELECT r.id FROM runs r
  WHERE r.part_id = fits.part_id AND r.started_at <= fits.created_at
  ORDER BY r.started_at DESC, r.id DESC LIMIT 1)
WHERE run_id IS NULL;
