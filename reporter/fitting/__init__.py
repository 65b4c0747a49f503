"""The model fit: the full model through the cell table, tests of contrasts, ANOVA tables
(Types I, II, III) and the bounds that rounded cell summaries put on them."""
