"""Robust feedforward search: common-random-number objectives, the search, Sobol indices."""
