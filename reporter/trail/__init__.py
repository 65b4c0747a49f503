"""The study's paper trail: a plan locked before the data (:mod:`.lock`), the a-priori power of
its tests (:mod:`.planning`), the analysis-plan document (:mod:`.plan_document`), the deviations of
a run from its locked plan (:mod:`.deviations`), and verification of results (:mod:`.verify`)."""
