-- porewise schema, version 5: the conductivity form a fit was made with.
--
-- `porewise fit DB --conductivity mualem|burdine` records the pore model the fit's derived
-- conductivity uses where the retention model has that form (Brooks-Corey has both). NULL is
-- the model's usual pairing: Burdine for Brooks-Corey, Mualem for the van Genuchten family,
-- Kosugi and Durner, Campbell's own form for Campbell.

ALTER TABLE fit ADD COLUMN conductivity TEXT
    CHECK (conductivity IS NULL OR conductivity IN ('mualem', 'burdine'));
