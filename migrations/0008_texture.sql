-- porewise schema, version 8: the campaign's default for the texture prior.
--
-- NULL: off (a fit uses the readings alone unless `fit --prior texture` asks). N: `fit`
-- without --prior fits van Genuchten with the layer's texture-class prior to every sample with
-- at most N readings whose layer has sand, silt and clay. Which basis a fit had is kept in its
-- report (`prior`), so fits need no new column.
ALTER TABLE campaign ADD COLUMN texture_prior_max_readings INTEGER
    CHECK (texture_prior_max_readings IS NULL OR texture_prior_max_readings BETWEEN 0 AND 1000);
