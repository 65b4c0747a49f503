"""The study's paper trail: plan locks, deviations from them, and verification of results."""
