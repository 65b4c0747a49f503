"""anova-report: from a plan file and a data file to a checkable ANOVA report."""
