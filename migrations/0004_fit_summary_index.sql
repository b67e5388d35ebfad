-- porewise schema, version 4: fit standings without reading the fit rows.
--
-- A fit row carries its whole report (tens of kB of JSON with per-reading diagnostics), and
-- the columns added in version 2 (status, sample_rev) sit after it, so reading them walks the
-- row's overflow pages. These covering indexes answer "which fit is current, of which model,
-- from which readings, at which revision" and "which attempts failed" from the index alone:
-- the campaign tree of thousands of samples then loads in milliseconds.

CREATE INDEX fit_current_summary
    ON fit (is_current, sample_id, id, model, readings_fingerprint, sample_rev);
CREATE INDEX fit_failed_summary ON fit (status, id, sample_id, message);
